/* The site page: entries are kept on the device first, then sent.

   Each entry gets its own idempotency key when the user taps Save and goes
   into this browser's local storage ("saved on device") before anything is
   sent. The outbox is sent in order; a 201 marks the entry "sent", a 409
   "conflict" (the server's current state is shown and the user can enter
   again), a 400/422 "not accepted" with the server's message. A network
   failure, a 5xx or a 429 leaves the entry on the device and tries again
   with a growing wait, and at once when the browser says it is back online.
   A retry sends the same key, so the server stores each entry once. */
(function () {
  "use strict";
  var root = document.querySelector("[data-site]");
  if (!root) return;
  var api = root.dataset.api;
  var csrf = root.dataset.csrf;
  var today = root.dataset.today;
  var store = "sitepace.outbox." + root.dataset.project + "." + root.dataset.user;
  var KEEP_SENT = 30;
  var busy = false;
  var again = false;
  var attempt = 0;
  var timer = null;

  function load() {
    try { return JSON.parse(localStorage.getItem(store) || "[]"); }
    catch (e) { return []; }
  }
  function save(list) {
    var sent = list.filter(function (e) { return e.state === "sent"; });
    var drop = sent.length - KEEP_SENT;
    var kept = list.filter(function (e) {
      if (e.state === "sent" && drop > 0) { drop -= 1; return false; }
      return true;
    });
    localStorage.setItem(store, JSON.stringify(kept));
  }

  function newKey() {
    if (window.crypto && crypto.randomUUID) return crypto.randomUUID();
    var b = crypto.getRandomValues(new Uint8Array(16));
    b[6] = (b[6] & 0x0f) | 0x40;
    b[8] = (b[8] & 0x3f) | 0x80;
    var h = Array.prototype.map.call(b, function (x) { return (x + 256).toString(16).slice(1); }).join("");
    return h.slice(0, 8) + "-" + h.slice(8, 12) + "-" + h.slice(12, 16) + "-" + h.slice(16, 20) + "-" + h.slice(20);
  }

  var LABEL = { device: "saved on device", sent: "sent", conflict: "conflict", refused: "not accepted" };

  function card(key) {
    return root.querySelectorAll('article.job[data-activity="' + CSS.escape(key) + '"]');
  }

  function describe(state) {
    var bits = [state.status === "finished" ? "Finished " + state.actual_finish
      : state.status === "started" ? "Under way" : "Not started"];
    if (state.actual_start) bits.push("started " + state.actual_start);
    if (state.percent_complete !== null && state.percent_complete !== undefined) bits.push(state.percent_complete + " %");
    if (state.remaining !== null && state.remaining !== undefined) bits.push(state.remaining + " days left");
    if (state.crew_count !== null && state.crew_count !== undefined) bits.push("crew " + state.crew_count);
    return bits.join(" · ");
  }

  function showState(key, state) {
    card(key).forEach(function (art) {
      art.dataset.version = state.version;
      art.dataset.status = state.status;
      art.dataset.start = state.actual_start || "";
      art.querySelector("[data-now]").textContent = describe(state);
      var start = art.querySelector('input[name="actual_start"]');
      if (state.actual_start) start.value = state.actual_start;
    });
  }

  function render() {
    var list = load();
    var counts = { device: 0, sent: 0, conflict: 0, refused: 0 };
    list.forEach(function (e) { counts[e.state] = (counts[e.state] || 0) + 1; });
    Object.keys(counts).forEach(function (k) {
      var el = root.querySelector('[data-sync-count="' + k + '"]');
      if (el) {
        el.querySelector("b").textContent = counts[k];
        el.classList.toggle("lit", counts[k] > 0);
      }
    });
    var box = document.getElementById("sp-outbox");
    box.textContent = "";
    list.slice().reverse().forEach(function (e) {
      var li = document.createElement("li");
      li.dataset.state = e.state;
      li.dataset.key = e.key;
      li.dataset.activity = e.body.activity;
      var what = [];
      if (e.body.actual_finish) what.push("finished " + e.body.actual_finish);
      else if (e.body.actual_start) what.push("started " + e.body.actual_start);
      if (e.body.percent_complete !== undefined) what.push(e.body.percent_complete + " %");
      if (e.body.remaining !== undefined) what.push(e.body.remaining + " days left");
      if (e.body.crew_count !== undefined) what.push("crew " + e.body.crew_count);
      if (e.body.note) what.push("note");
      var badge = document.createElement("span");
      badge.className = "badge badge-" + e.state;
      badge.textContent = LABEL[e.state];
      li.appendChild(badge);
      li.appendChild(document.createTextNode(" " + e.body.activity + ": " + (what.join(", ") || "entry")));
      if (e.message) {
        var m = document.createElement("span");
        m.className = "why";
        m.textContent = " — " + e.message;
        li.appendChild(m);
      }
      box.appendChild(li);
    });
    list.forEach(function (e) {
      card(e.body.activity).forEach(function (art) {
        var slot = art.querySelector("[data-sync-state]");
        slot.textContent = LABEL[e.state];
        slot.dataset.state = e.state;
        var panel = art.querySelector("[data-conflict]");
        if (e.state === "conflict" && e.current) {
          panel.hidden = false;
          panel.textContent = "Conflict: this activity changed on the server since this device read it. " +
            "The server has: " + describe(e.current) + ". Your entry was not stored; check and enter it again.";
        } else if (e.state === "sent" || e.state === "device") {
          panel.hidden = true;
        }
      });
    });
  }

  function signal(text, ok) {
    var el = root.querySelector("[data-signal]");
    el.textContent = text;
    el.dataset.ok = ok ? "true" : "false";
  }

  function later() {
    if (timer) return;
    var wait = Math.min(60000, 2000 * Math.pow(2, attempt));
    attempt += 1;
    timer = setTimeout(function () { timer = null; flush(); }, wait);
  }

  function settle(key, change) {
    var list = load();
    list.forEach(function (e) { if (e.key === key) change(e); });
    save(list);
    render();
  }

  async function flush() {
    // An entry saved while the outbox is being sent goes in the next round.
    if (busy) { again = true; return; }
    busy = true;
    again = false;
    try {
      var waiting = load().filter(function (e) { return e.state === "device"; });
      for (var i = 0; i < waiting.length; i++) {
        var e = waiting[i];
        var answer;
        try {
          answer = await fetch(api, {
            method: "POST",
            credentials: "same-origin",
            headers: { "Content-Type": "application/json", "Idempotency-Key": e.key, "X-CSRFToken": csrf },
            body: JSON.stringify(e.body)
          });
        } catch (err) {
          signal("no signal: entries wait on this device", false);
          later();
          return;
        }
        var data = null;
        try { data = await answer.json(); } catch (err) { data = null; }
        if (answer.status === 201 || answer.status === 200) {
          settle(e.key, function (x) { x.state = "sent"; x.message = ""; x.sent_at = new Date().toISOString(); });
          if (data && data.state) showState(e.body.activity, data.state);
        } else if (answer.status === 409 && data && data.current) {
          settle(e.key, function (x) { x.state = "conflict"; x.current = data.current; x.message = data.error.message; });
          showState(e.body.activity, data.current);
        } else if (answer.status === 400 || answer.status === 422 || answer.status === 404) {
          var msg = data && data.error ? data.error.message : "refused (" + answer.status + ")";
          settle(e.key, function (x) { x.state = "refused"; x.message = msg; });
        } else if (answer.status === 401 || answer.status === 403) {
          signal("sign in again to send the entries kept on this device", false);
          return;
        } else {
          signal("the server is busy: entries wait on this device", false);
          later();
          return;
        }
      }
      attempt = 0;
      signal("online: everything on this device is sent", true);
    } finally {
      busy = false;
      if (again) flush();
    }
  }

  function collect(form, art) {
    var body = { activity: art.dataset.activity, activity_version: Number(art.dataset.version) };
    ["actual_start", "actual_finish", "delay_reason", "delay_note", "note"].forEach(function (name) {
      var v = form.elements[name].value.trim();
      if (v) body[name] = v;
    });
    ["percent_complete", "remaining", "crew_count"].forEach(function (name) {
      var v = form.elements[name].value.trim();
      if (v !== "") body[name] = Number(v);
    });
    // A start already recorded is sent again only with a finish (it says
    // which start the finish belongs to); otherwise it would add nothing.
    if (body.actual_start && body.actual_start === art.dataset.start && !body.actual_finish) {
      delete body.actual_start;
    }
    body.device_time = new Date().toISOString();
    return body;
  }

  root.addEventListener("click", function (ev) {
    var mark = ev.target.closest("[data-mark]");
    if (!mark) return;
    var form = mark.closest("form");
    if (mark.dataset.mark === "started") {
      form.elements.actual_start.value = form.elements.actual_start.value || today;
    } else {
      form.elements.actual_start.value = form.elements.actual_start.value || today;
      form.elements.actual_finish.value = today;
    }
    mark.setAttribute("aria-pressed", "true");
  });

  root.addEventListener("submit", function (ev) {
    var form = ev.target.closest("form[data-entry]");
    if (!form) return;
    ev.preventDefault();
    var art = form.closest("article.job");
    var body = collect(form, art);
    var given = Object.keys(body).filter(function (k) {
      return ["activity", "activity_version", "device_time"].indexOf(k) < 0;
    });
    var slot = art.querySelector("[data-sync-state]");
    if (!given.length) { slot.textContent = "nothing to save yet"; return; }
    var list = load();
    list.push({ key: newKey(), body: body, state: "device", made_at: body.device_time });
    save(list);
    form.reset();
    form.querySelectorAll("[aria-pressed]").forEach(function (b) { b.removeAttribute("aria-pressed"); });
    form.elements.actual_start.value = body.actual_start || art.dataset.start || "";
    render();
    flush();
  });

  window.addEventListener("online", function () { attempt = 0; if (timer) { clearTimeout(timer); timer = null; } flush(); });
  window.addEventListener("offline", function () { signal("no signal: entries wait on this device", false); });
  render();
  if (navigator.onLine === false) signal("no signal: entries wait on this device", false);
  flush();
})();
