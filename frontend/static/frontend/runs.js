/* The run panel on the overview: a scheduler starts a levelling run, and every
   member follows the run under way — a bar of the elapsed time against the
   time limit, the best finish so far, the solver's bound and the gap — then
   sees what the published version moved. Talks to the same REST API as any
   script (session sign-in, CSRF header). Plain JavaScript, no build step. */
(function () {
  "use strict";
  var panel = document.querySelector("[data-run-panel]");
  if (!panel) { return; }
  var api = panel.dataset.api;
  var csrf = panel.dataset.csrf;
  var form = panel.querySelector("[data-run-form]");
  var status = panel.querySelector("[data-run-status]");
  var bar = panel.querySelector("[data-run-bar]");
  var fill = bar.querySelector(".fill");
  var cancel = panel.querySelector("[data-run-cancel]");
  var message = panel.querySelector("[data-run-message]");
  var movedBox = panel.querySelector("[data-run-moved]");
  var POLL_MS = 500;
  var ACTIVE = { waiting: true, working: true };
  var current = null;   // id of the run followed
  var shown = 0;        // percent on the bar; it never goes back
  var seenWorking = null;

  function field(name, text) {
    var el = panel.querySelector('[data-run-field="' + name + '"]');
    if (el) { el.textContent = text; }
  }

  function setBar(percent) {
    shown = Math.max(shown, Math.min(100, percent));
    var value = Math.round(shown);
    bar.setAttribute("aria-valuenow", String(value));
    bar.setAttribute("aria-valuetext", value + " %");
    fill.style.width = shown + "%";
  }

  function say(text, kind) {
    message.textContent = text || "";
    message.dataset.kind = kind || "";
  }

  async function call(method, path, body) {
    var options = { method: method, credentials: "same-origin",
                    headers: { "Accept": "application/json" } };
    if (body !== undefined) {
      options.headers["Content-Type"] = "application/json";
      options.body = JSON.stringify(body);
    }
    if (method !== "GET") { options.headers["X-CSRFToken"] = csrf; }
    var answer = await fetch(api + path, options);
    var data = null;
    try { data = await answer.json(); } catch (e) { data = null; }
    return { status: answer.status, data: data, retryAfter: answer.headers.get("Retry-After") };
  }

  function problemsText(data) {
    if (!data) { return ""; }
    var text = data.message || data.detail || "";
    var problems = (data.error && data.error.problems) || data.problems || [];
    if (data.error && data.error.message) { text = data.error.message; }
    if (problems.length) {
      text += " (" + problems.map(function (p) { return (p.pointer || "") + ": " + p.message; }).join("; ") + ")";
    }
    return text;
  }

  function show(run) {
    status.hidden = false;
    field("id", String(run.id) + (run.goal ? " · " + run.goal : "") + " · limit " + run.time_limit + " s");
    field("state", run.state);
    var p = run.progress || {};
    var elapsed = p.elapsed || 0;
    if (run.state === "working") {
      if (seenWorking === null) { seenWorking = performance.now() - elapsed * 1000; }
      // The solver writes its figures when it finds a better schedule; between
      // two of them the clock still runs.
      elapsed = Math.max(elapsed, (performance.now() - seenWorking) / 1000);
      setBar(Math.min(99, 100 * elapsed / run.time_limit));
    }
    field("elapsed", run.state === "waiting" ? "waiting for a worker"
          : elapsed.toFixed(1) + " s of " + run.time_limit + " s");
    field("best_finish", p.best_finish || "–");
    field("bound", p.bound || "–");
    field("gap", p.gap_percent === null || p.gap_percent === undefined ? "–" : p.gap_percent.toFixed(1) + " %");
    if (cancel) { cancel.hidden = !ACTIVE[run.state]; }
    if (form) { form.querySelector("[data-run-start]").disabled = !!ACTIVE[run.state]; }
    bar.dataset.state = run.state;
  }

  function line(text) {
    var li = document.createElement("li");
    li.textContent = text;
    return li;
  }

  async function showMoved(run) {
    movedBox.textContent = "";
    if (!run.version) { return; }
    var got = await call("GET", "schedule/versions/" + run.version);
    if (got.status !== 200 || !got.data) { return; }
    var c = got.data.changes || {};
    var h = document.createElement("h3");
    h.textContent = "Published as version " + run.version + ": what moved";
    movedBox.appendChild(h);
    var list = document.createElement("ul");
    list.dataset.runChanges = "";
    if (c.previous_version === null || c.previous_version === undefined) {
      list.appendChild(line("The first published version: finish " + c.finish + "."));
    } else {
      var shift = c.finish_shift_days;
      list.appendChild(line(shift ? "Finish moved from " + c.previous_finish + " to " + c.finish +
        " (" + (shift > 0 ? "+" : "") + shift + " days)." : "Finish unchanged at " + c.finish + "."));
      var moved = c.moved || [];
      list.appendChild(line(moved.length ? moved.length + " activities moved, largest moves first:" : "No activity moved."));
      moved.slice(0, 15).forEach(function (m) {
        var li = line(m.key + " " + (m.name || "") + ": " + m.from + " → " + m.to + " (" +
          (m.shift_days > 0 ? "+" : "") + m.shift_days + " days)");
        li.dataset.moved = m.key;
        list.appendChild(li);
      });
      if (moved.length > 15) { list.appendChild(line("… and " + (moved.length - 15) + " more.")); }
      (c.crew_peaks || []).forEach(function (p) {
        var li = line("Crew " + p.crew + ": peak " + p.previous_peak + " → " + p.peak + " (capacity " + p.capacity + ")" +
          (p.peak > p.capacity ? ", over capacity." : "."));
        if (p.peak > p.capacity) { li.className = "over"; }
        list.appendChild(li);
      });
    }
    movedBox.appendChild(list);
    var again = document.createElement("a");
    again.href = window.location.pathname;
    again.className = "button";
    again.textContent = "Show the new dates";
    movedBox.appendChild(again);
  }

  async function follow(id) {
    current = id;
    shown = 0;
    seenWorking = null;
    setBar(0);
    movedBox.textContent = "";
    while (current === id) {
      var got;
      try {
        got = await call("GET", "runs/" + id);
      } catch (e) {
        say("No answer from the server; trying again.", "offline");
        await new Promise(function (r) { setTimeout(r, POLL_MS * 4); });
        continue;
      }
      if (got.status !== 200) {
        say("Run " + id + " cannot be read: " + problemsText(got.data), "error");
        return;
      }
      var run = got.data;
      show(run);
      if (!ACTIVE[run.state]) {
        if (run.state === "published") {
          setBar(100);
          say("Finished and published.", "done");
          await showMoved(run);
        } else if (run.state === "failed") {
          say("The run failed: " + (run.error || "") , "error");
        } else {
          say("The run was " + run.state + ".", "");
        }
        return;
      }
      say(run.state === "waiting" ? "Queued; a worker takes it up shortly." : "The solver is working.", "");
      await new Promise(function (r) { setTimeout(r, POLL_MS); });
    }
  }

  if (form) {
    form.addEventListener("submit", async function (event) {
      event.preventDefault();
      var body = { kind: "level", goal: form.goal.value,
                   time_limit: Number(form.time_limit.value), stable: form.stable.checked };
      say("Sending…", "");
      var got;
      try {
        got = await call("POST", "runs/", body);
      } catch (e) {
        say("No answer from the server: nothing was started. Try again when the signal is back.", "error");
        return;
      }
      if (got.status === 202) {
        follow(got.data.id);
      } else if (got.status === 503) {
        say("The work queue is down: nothing was started. Try again in " + (got.retryAfter || "a few") + " seconds.", "error");
      } else {
        say("Not started: " + problemsText(got.data), "error");
      }
    });
  }

  if (cancel) {
    cancel.addEventListener("click", async function () {
      if (current === null) { return; }
      var got = await call("POST", "runs/" + current + "/cancel");
      if (got.status >= 400) { say("Not cancelled: " + problemsText(got.data), "error"); }
    });
  }

  if (panel.dataset.activeRun) { follow(Number(panel.dataset.activeRun)); }
})();
