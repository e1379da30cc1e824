/* rhledger: the service worker (/sw.js, static/sw.js) from the page's side: registering it,
 * the pages it should keep once it is ready, its messages, and messages to it.
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 *
 * A new version of the static files makes a new worker; it takes over at once
 * (skipWaiting + clients.claim in static/sw.js), so the page has no update step of its own.
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var state = rhl.state;

  function register() {
    if (!("serviceWorker" in navigator)) {
      state.swError = "This browser has no service workers: pages cannot be opened without the laptop.";
      return;
    }
    if (!window.isSecureContext) {
      state.swError = "Offline use needs the secure address (https://…). Open Phone setup on the laptop's address to install its certificate.";
      return;
    }
    navigator.serviceWorker.register("/sw.js", { scope: "/", updateViaCache: "none" }).then(function () {
      return navigator.serviceWorker.ready;
    }).then(function () {
      if (!state.cachedCopy) { rhl.kept.warm(); }
    }).catch(function (err) {
      state.swError = "The offline helper (service worker) could not start: " + err;
      rhl.status.render();
    });
    navigator.serviceWorker.addEventListener("message", function (ev) {
      if (ev.data && ev.data.type === "changed") { rhl.status.refreshCounts(); rhl.page.render(); }
    });
  }

  function tell(msg) {
    if (!("serviceWorker" in navigator)) { return; }
    navigator.serviceWorker.ready.then(function (reg) {
      if (reg.active) { reg.active.postMessage(msg); }
    });
  }

  rhl.worker = { register: register, tell: tell };
})();
