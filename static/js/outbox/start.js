/* rhledger: starts the page-side outbox scripts once the page is parsed; loaded last
 * (the order is in static/js/outbox/core.js). Also window.rhForms, for tests and the
 * browser console.
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var PARTS = ["status", "worker", "kept", "request", "messages", "forms", "page"];
  var missing = rhl ? PARTS.filter(function (p) { return !rhl[p]; }) : ["core"];
  if (missing.length) {
    // Nothing is taken over, so the forms post to their own page, as without JavaScript.
    if (window.console) { console.error("rhledger: outbox scripts did not load (" + missing.join(", ") + "); forms post to the laptop directly"); }
    return;
  }

  var Q = rhl.Q, state = rhl.state, status = rhl.status;

  function start() {
    if (!Q) {
      status.render();
      if (window.console) { console.error("rhledger: outbox/queue.js did not load; forms post to the laptop directly"); }
      return;
    }
    rhl.kept.markCachedCopy();
    var token = rhl.pageToken();
    if (token) { Q.setCsrf(token); }
    Q.metaGet("user").then(function (u) { state.user = state.user || u || null; });
    if (!state.cachedCopy && rhl.$('form[action$="/signout"]')) {
      Q.session().then(function (who) {
        if (who) { state.user = { username: who.user, name: who.name }; }
      }, function () { /* not reachable: the last known user stays */ });
    }
    rhl.worker.register();
    document.addEventListener("submit", rhl.kept.onSignout, true);
    document.addEventListener("submit", rhl.forms.onSubmit);
    document.addEventListener("click", rhl.page.onClick);
    Q.onChange(function (msg) {
      if (msg && (msg.type === "changed" || msg.type === "replayed")) { status.refreshCounts(); rhl.page.render(); }
    });
    status.listenNetwork();
    status.refreshCounts();
    rhl.page.render();
    rhl.kept.renderList();
    rhl.forms.reopenFromHash();
    window.addEventListener("hashchange", rhl.forms.reopenFromHash);
    status.ping().then(function (ok) { if (ok) { status.sendOutbox("load"); } });
    status.keepTrying();
    status.render();
  }

  window.rhForms = { buildRequest: rhl.request.build, sendOutbox: status.sendOutbox, state: state };

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
