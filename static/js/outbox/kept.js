/* rhledger: pages kept on this phone by the service worker.
 *   - a page that is the phone's kept copy (the worker marks it with
 *     <meta name="rhledger-offline-copy">) says so, and its forms lose stale defaults;
 *   - asking the worker to keep the pages needed offline (warm);
 *   - the list of kept pages (#saved-pages, on /outbox and /offline);
 *   - the kept pages go at sign-out (they hold names; the outbox stays).
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var Q = rhl.Q, state = rhl.state, $ = rhl.$, $all = rhl.$all, el = rhl.el, localTime = rhl.localTime;

  /* Pages the phone should hold before the laptop goes out of reach: the booking form and
   * Today (named by the worker), every entry form linked from this page, links marked
   * data-offline-warm. Only while signed in. */
  function warm() {
    var signedIn = !!$('form[action$="/signout"]');
    if (!signedIn) { return; }
    var urls = [];
    $all('a[href*="/add/"], a[data-offline-warm]').forEach(function (a) {
      var u = new URL(a.href, location.href);
      if (u.origin === location.origin) { urls.push(u.pathname + u.search); }
    });
    rhl.worker.tell({ type: "warm", urls: urls, defaults: true });
  }

  function phoneToday() {
    var d = new Date();
    return d.getFullYear() + "-" + String(d.getMonth() + 1).padStart(2, "0") + "-" + String(d.getDate()).padStart(2, "0");
  }

  function noteField(input, text) {
    var holder = input.closest(".field") || input.parentNode;
    if (holder.querySelector(".offline-note")) { return; }
    holder.appendChild(el("p", { "class": "offline-note", role: "note", text: text }));
  }

  /* A saved copy of a form still holds the defaults of the moment it was saved ("now",
   * "today"). Those would be wrong later: times are cleared for the user to enter, dates
   * move to today on this phone, each with a note by the field. */
  function refreshStaleDefaults(form) {
    var today = phoneToday();
    $all('input[type="date"]', form).forEach(function (inp) {
      var max = inp.getAttribute("max");
      if (max && max < today) {
        if (inp.value && inp.value === max && inp.defaultValue === max) {
          inp.value = today;
          noteField(inp, "Set to today on this phone (the saved form said " + max + "). Check it.");
        }
        inp.setAttribute("max", today);
      }
    });
    if ((form.getAttribute("data-method") || "POST").toUpperCase() === "POST") {
      $all('input[type="datetime-local"]', form).forEach(function (inp) {
        if (inp.defaultValue) {
          inp.value = "";
          noteField(inp, "Enter the time: this form comes from the copy saved on the phone, so its time was out of date.");
        }
      });
    }
  }

  function markCachedCopy() {
    var at = rhl.metaContent("rhledger-offline-copy");
    if (!at) { return; }
    state.cachedCopy = at;
    state.reachable = false;
    var main = document.getElementById("main") || document.body;
    main.insertBefore(el("p", { "class": "offline-copy", role: "status", id: "offline-copy",
      text: "The laptop cannot be reached. This is the copy saved on this phone on " + localTime(at) +
            "; it may be out of date. What you save now is kept on the phone and sent later." }), main.firstChild);
    $all("form[data-api]").forEach(refreshStaleDefaults);
  }

  function renderList() {
    var host = document.getElementById("saved-pages");
    if (!host || !Q) { return; }
    Q.metaGet("pages").then(function (index) {
      var rows = Object.keys(index || {}).map(function (u) { return [u, index[u]]; })
        .sort(function (a, b) { return a[1].at < b[1].at ? 1 : -1; });
      host.textContent = "";
      if (!rows.length) {
        host.appendChild(el("p", { text: "No pages are saved on this phone yet. Pages you open while the laptop is reachable are kept here." }));
        return;
      }
      var ul = el("ul", { "class": "saved-pages" });
      rows.forEach(function (r) {
        ul.appendChild(el("li", {}, [el("a", { href: r[0], text: r[1].title || r[0] }), " · saved " + localTime(r[1].at)]));
      });
      host.appendChild(ul);
    });
  }

  function onSignout(ev) {
    var form = ev.target;
    if (form instanceof HTMLFormElement && /\/signout$/.test(form.getAttribute("action") || "")) {
      // The saved pages hold names; they go with the sign-out. The outbox stays: it was never sent.
      rhl.worker.tell({ type: "clear-pages" });
      Q.metaSet("user", null);
    }
  }

  rhl.kept = {
    markCachedCopy: markCachedCopy,
    refreshStaleDefaults: refreshStaleDefaults,
    warm: warm,
    renderList: renderList,
    onSignout: onSignout
  };
})();
