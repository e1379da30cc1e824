/* rhledger page helpers: gestational age computed as you type, validation hints.
   Plain JS, no framework. static/js/outbox/forms.js (web-offline) handles form submission. */
(function () {
  "use strict";

  function gaText(days) { return Math.floor(days / 7) + "+" + (days % 7); }

  function daysBetween(a, b) { // ISO dates, b - a
    var da = Date.parse(a + "T00:00:00Z"), db = Date.parse(b + "T00:00:00Z");
    if (isNaN(da) || isNaN(db)) return null;
    return Math.round((db - da) / 86400000);
  }

  function todayIso() {
    var d = new Date();
    return d.getFullYear() + "-" + String(d.getMonth() + 1).padStart(2, "0") + "-" + String(d.getDate()).padStart(2, "0");
  }

  /* Booking: dating preview. The server computes it (GET /api/v1/calc/dating, the care engine's
     own rules); offline, the LMP arithmetic alone is shown and marked as such. */
  function setupDating(form) {
    var out = form.querySelector("[data-ga-preview]");
    if (!out) return;
    var names = ["lmp", "scan_on", "scan_crl_mm", "scan_ga_days", "edd", "booked_on"];
    var timer = null;
    function val(n) {
      var el = form.querySelector('[name="pregnancy.' + n + '"]');
      return el ? el.value.trim() : "";
    }
    function offline() {
      var lmp = val("lmp");
      if (!lmp) { out.textContent = ""; return; }
      var d = daysBetween(lmp, todayIso());
      out.textContent = d === null ? "" : "GA today by LMP: " + gaText(d) + " (offline estimate; the laptop confirms the dating on saving)";
    }
    function update() {
      var q = new URLSearchParams();
      names.forEach(function (n) { if (val(n)) q.set(n, val(n)); });
      if (!val("lmp") && !val("scan_crl_mm") && !val("scan_ga_days") && !val("edd")) { out.textContent = ""; return; }
      fetch("/api/v1/calc/dating?" + q.toString(), {credentials: "same-origin", headers: {"Accept": "application/json"}})
        .then(function (r) { return r.json().then(function (j) { return {ok: r.ok, j: j}; }); })
        .then(function (res) {
          if (res.ok && res.j.result) {
            var r = res.j.result;
            out.textContent = "GA today " + (r.ga_today || "") + " · EDD " + (r.edd || "") + (r.method ? " (" + r.method + ")" : "") + (r.note ? " · " + r.note : "");
          } else if (res.j.errors) {
            out.textContent = Object.keys(res.j.errors).map(function (k) { return k + ": " + res.j.errors[k]; }).join("; ");
          }
        })
        .catch(offline);
    }
    names.forEach(function (n) {
      var el = form.querySelector('[name="pregnancy.' + n + '"]');
      if (el) el.addEventListener("input", function () { clearTimeout(timer); timer = setTimeout(update, 300); });
    });
    update();
  }

  /* Validation hints: show the browser's message next to the field when it loses focus. */
  function setupHints(form) {
    form.addEventListener("blur", function (ev) {
      var el = ev.target;
      if (!el.name || !el.checkValidity) return;
      var box = form.querySelector('[data-error-for="' + el.name + '"]');
      if (!box) return;
      if (el.checkValidity()) {
        if (box.dataset.hint) { box.hidden = true; box.textContent = ""; delete box.dataset.hint; }
      } else {
        var msg = el.validationMessage;
        if (el.dataset.gaMin && el.validity.patternMismatch) msg = "write weeks+days such as 28+3";
        if (el.validity.rangeOverflow || el.validity.rangeUnderflow) msg = "allowed range " + (el.min || "") + " to " + (el.max || "");
        box.textContent = msg; box.hidden = false; box.dataset.hint = "1";
      }
    }, true);
  }

  /* GA fields: show the days beside "28+3" as the user types, and the allowed range. */
  function setupGa(el) {
    el.addEventListener("input", function () {
      var m = /^\s*(\d{1,2})(?:\+([0-6]))?\s*$/.exec(el.value);
      var box = el.form && el.form.querySelector('[data-error-for="' + el.name + '"]');
      if (!box) return;
      if (!el.value.trim() || m) {
        if (m) {
          var days = parseInt(m[1], 10) * 7 + (m[2] ? parseInt(m[2], 10) : 0);
          var lo = parseInt(el.dataset.gaMin, 10), hi = parseInt(el.dataset.gaMax, 10);
          if (days < lo || days > hi) { box.textContent = "allowed range " + gaText(lo) + " to " + gaText(hi) + " weeks+days"; box.hidden = false; box.dataset.hint = "1"; return; }
        }
        if (box.dataset.hint) { box.hidden = true; box.textContent = ""; delete box.dataset.hint; }
      }
    });
  }

  /* Printing: show amendment histories and folded plan items in full. */
  window.addEventListener("beforeprint", function () {
    Array.prototype.forEach.call(document.querySelectorAll("details:not([open])"), function (d) {
      d.setAttribute("open", ""); d.dataset.printOpened = "1";
    });
  });
  window.addEventListener("afterprint", function () {
    Array.prototype.forEach.call(document.querySelectorAll("details[data-print-opened]"), function (d) {
      d.removeAttribute("open"); delete d.dataset.printOpened;
    });
  });

  document.addEventListener("DOMContentLoaded", function () {
    Array.prototype.forEach.call(document.querySelectorAll("form"), function (f) { setupHints(f); setupDating(f); });
    Array.prototype.forEach.call(document.querySelectorAll("input[data-ga-min]"), setupGa);
  });
})();
