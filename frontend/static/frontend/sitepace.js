/* Sitepace pages: details of an activity on hover, tap or keyboard focus;
   arrow keys between bars; open or close every group; open all to print.
   Plain JavaScript, nothing loaded from elsewhere. */
(function () {
  "use strict";
  var panel = document.getElementById("sp-details");
  var pinned = null;

  function fmt(iso) {
    if (!iso) { return "–"; }
    var d = new Date(iso + "T00:00:00");
    return d.toLocaleDateString("en-GB", { weekday: "short", day: "numeric", month: "short", year: "numeric" });
  }

  function row(dl, term, value) {
    var dt = document.createElement("dt");
    dt.textContent = term;
    var dd = document.createElement("dd");
    dd.textContent = value;
    dl.appendChild(dt);
    dl.appendChild(dd);
  }

  function show(bar) {
    if (!panel || !bar) { return; }
    var d = bar.dataset;
    panel.textContent = "";
    var close = document.createElement("button");
    close.type = "button";
    close.className = "close";
    close.setAttribute("aria-label", "Close the details");
    close.textContent = "×";
    close.addEventListener("click", hide);
    panel.appendChild(close);
    var h = document.createElement("h3");
    h.textContent = d.activity + " · " + d.name;
    panel.appendChild(h);
    var dl = document.createElement("dl");
    var levelled = document.body.dataset.levelled === "true";
    if (d.milestone === "true") {
      row(dl, "Milestone", fmt(d.start));
    } else {
      row(dl, levelled ? "Levelled dates" : "Dates", fmt(d.start) + " – " + fmt(d.finish));
    }
    if (levelled) {
      row(dl, "Early dates", fmt(d.earlyStart) + " – " + fmt(d.earlyFinish));
    }
    row(dl, "Late finish", fmt(d.lateFinish));
    row(dl, "Total float", d.totalFloat + " working days");
    row(dl, "Free float", d.freeFloat + " working days");
    row(dl, "Critical", d.critical === "true" ? "yes" : "no");
    row(dl, "Driven by", d.drivers ? d.drivers.split(" ").join(", ") : "no predecessor: the project start or a date");
    row(dl, "Done", d.done + " % (" + d.status.replace("_", " ") + ")");
    panel.appendChild(dl);
    panel.hidden = false;
  }

  function hide() {
    if (pinned) { pinned.classList.remove("pinned"); }
    pinned = null;
    if (panel) { panel.hidden = true; }
  }

  function barOf(target) {
    return target && target.closest ? target.closest(".bar") : null;
  }

  document.addEventListener("mouseover", function (e) {
    var bar = barOf(e.target);
    if (bar && !pinned) { show(bar); }
  });
  document.addEventListener("focusin", function (e) {
    var bar = barOf(e.target);
    if (bar) { show(bar); }
  });
  document.addEventListener("click", function (e) {
    var bar = barOf(e.target);
    if (!bar) { return; }
    if (pinned) { pinned.classList.remove("pinned"); }
    pinned = bar;
    bar.classList.add("pinned");
    show(bar);
  });
  document.addEventListener("keydown", function (e) {
    if (e.key === "Escape") { hide(); return; }
    var bar = barOf(document.activeElement);
    if (!bar) { return; }
    if (e.key === "ArrowDown" || e.key === "ArrowUp") {
      var bars = Array.prototype.filter.call(document.querySelectorAll(".bar"), function (b) {
        return b.closest("details") === null || b.closest("details").open;
      });
      var i = bars.indexOf(bar) + (e.key === "ArrowDown" ? 1 : -1);
      if (i >= 0 && i < bars.length) {
        e.preventDefault();
        bars[i].focus();
        bars[i].scrollIntoView({ block: "nearest", inline: "nearest" });
      }
    } else if (e.key === "Enter" || e.key === " ") {
      e.preventDefault();
      bar.click();
    }
  });

  function setAll(open) {
    document.querySelectorAll("details.group").forEach(function (d) { d.open = open; });
  }
  var openAll = document.getElementById("sp-open-all");
  var closeAll = document.getElementById("sp-close-all");
  if (openAll) { openAll.addEventListener("click", function () { setAll(true); }); }
  if (closeAll) { closeAll.addEventListener("click", function () { setAll(false); }); }
  var print = document.getElementById("sp-print");
  if (print) { print.addEventListener("click", function () { window.print(); }); }
  window.addEventListener("beforeprint", function () { setAll(true); });
})();
