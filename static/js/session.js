/* rhledger session helpers: what the pages need without any inline script (the CSP forbids it).
 *
 *  - A page left open ends itself: after <meta name="idle-seconds"> without a key, touch or
 *    click, the kept pages are dropped and the sign-in page is shown (the laptop ends the
 *    session by the same clock).
 *  - Signing out, switching staff, or reaching the sign-in page drops every page the service
 *    worker kept (they show women by name; a phone can be shared or lost). The outbox stays:
 *    its entries were never sent and each names the person who saved it.
 *  - Buttons marked data-print print the page.
 */
(function () {
  "use strict";

  function dropKeptPages() {
    var done = [];
    if (navigator.serviceWorker && navigator.serviceWorker.controller) {
      navigator.serviceWorker.controller.postMessage({ type: "clear-pages" });
    }
    if (window.caches && caches.keys) {
      done.push(caches.keys().then(function (names) {
        return Promise.all(names.filter(function (n) { return n.indexOf("rhledger-pages") === 0; })
          .map(function (n) { return caches.delete(n); }));
      }));
    }
    if (window.rhOutbox && window.rhOutbox.metaSet) {
      done.push(window.rhOutbox.metaSet("pages", {}));
    }
    return Promise.all(done).catch(function (err) {
      console.error("rhledger: dropping the kept pages failed", err);
    });
  }
  window.rhDropKeptPages = dropKeptPages;

  function idleTimer() {
    var meta = document.querySelector('meta[name="idle-seconds"]');
    var secs = meta ? parseInt(meta.getAttribute("content"), 10) : NaN;
    if (!(secs > 0) || document.querySelector('meta[name="rhledger-offline-copy"]')) { return; }
    var last = Date.now();
    function touch() { last = Date.now(); }
    ["keydown", "pointerdown", "touchstart", "input", "scroll"].forEach(function (ev) {
      document.addEventListener(ev, touch, { passive: true, capture: true });
    });
    setInterval(function () {
      if (Date.now() - last < secs * 1000) { return; }
      last = Infinity;  // once
      dropKeptPages().then(function () {
        var next = location.pathname + location.search;
        location.replace("/signin?ended=idle&next=" + encodeURIComponent(next));
      });
    }, 5000);
  }

  document.addEventListener("submit", function (ev) {
    var action = (ev.target && ev.target.getAttribute && ev.target.getAttribute("action")) || "";
    if (/\/(signout|switch)$/.test(action)) { dropKeptPages(); }
  }, true);

  document.addEventListener("click", function (ev) {
    var b = ev.target && ev.target.closest ? ev.target.closest("[data-print]") : null;
    if (b) { ev.preventDefault(); window.print(); }
  });

  document.addEventListener("DOMContentLoaded", function () {
    if (document.body && document.body.classList.contains("page-signin")) { dropKeptPages(); }
    idleTimer();
  });
})();
