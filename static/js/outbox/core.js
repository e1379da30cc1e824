/* rhledger: what the page-side outbox scripts share (static/js/outbox/*.js in the pages).
 *
 * Forms keep working when the laptop cannot be reached. The page side is plain classic
 * scripts (no bundler, no modules: the service worker shares queue.js and queue-send.js
 * through importScripts), each adding one part to the namespace object window.rhl.
 * base.html loads them in this order, after static/vendor/idb-keyval/idb-keyval.umd.js:
 *
 *   outbox/queue.js          the outbox in IndexedDB, change notices (window.rhOutbox; also in the worker)
 *   outbox/queue-send.js     sending it to the laptop (adds to rhOutbox; also in the worker)
 *   outbox/core.js           this file: rhl.Q, rhl.state, DOM helpers
 *   outbox/status.js         rhl.status: connection and outbox count indicator, sending the outbox
 *   outbox/worker.js         rhl.worker: service worker registration and messages
 *   outbox/kept.js           rhl.kept: pages kept on the phone (saved copies, warming, the list)
 *   outbox/form-request.js   rhl.request: the request a <form data-api> makes
 *   outbox/form-messages.js  rhl.messages: what a form says above itself and by its fields
 *   outbox/forms.js          rhl.forms: form takeover (submit through the outbox), re-open
 *   outbox/page.js           rhl.page: the /outbox page
 *   outbox/start.js          starts it all once the page is parsed
 *
 * Only start.js acts on load; the others only define functions, and reach each other's
 * through rhl at call time. Without JavaScript the forms post to their own page (the HTML
 * fallback); so they do when a script here did not load (start.js says so in the console).
 */
(function () {
  "use strict";

  var state = { reachable: navigator.onLine, sending: false, counts: { total: 0, waiting: 0, attention: 0 },
                swError: null, cachedCopy: null, user: null };

  function $(sel, root) { return (root || document).querySelector(sel); }
  function $all(sel, root) { return Array.prototype.slice.call((root || document).querySelectorAll(sel)); }

  function el(tag, attrs, children) {
    var e = document.createElement(tag);
    Object.keys(attrs || {}).forEach(function (k) {
      if (k === "text") { e.textContent = attrs[k]; } else if (attrs[k] !== null && attrs[k] !== undefined) { e.setAttribute(k, attrs[k]); }
    });
    (children || []).forEach(function (c) { if (c) { e.appendChild(typeof c === "string" ? document.createTextNode(c) : c); } });
    return e;
  }

  function metaContent(name) {
    var m = document.querySelector('meta[name="' + name + '"]');
    return m ? m.getAttribute("content") : null;
  }

  /* The CSRF token of this page, unless the page is a copy kept by the service worker
   * (its token may be older than the session's). */
  function pageToken() {
    return state.cachedCopy ? null : metaContent("csrf-token");
  }

  function localTime(iso) {
    if (!iso) { return ""; }
    var d = new Date(iso);
    if (isNaN(d.getTime())) { return iso; }
    return d.toLocaleString(undefined, { weekday: "short", day: "numeric", month: "short", hour: "2-digit", minute: "2-digit" });
  }

  /* Errors as the API gives them ({"woman": {"name": "..."}}) as "woman.name" -> text. */
  function flatten(errors, prefix, out) {
    Object.keys(errors || {}).forEach(function (k) {
      var v = errors[k];
      var name = prefix ? prefix + "." + k : k;
      if (v && typeof v === "object" && !Array.isArray(v)) { flatten(v, name, out); } else { out[name] = Array.isArray(v) ? v.join("; ") : String(v); }
    });
    return out;
  }

  window.rhl = {
    // The outbox (outbox/queue.js); undefined when it did not load: forms then post straight to the laptop.
    Q: window.rhOutbox,
    state: state,
    $: $,
    $all: $all,
    el: el,
    metaContent: metaContent,
    pageToken: pageToken,
    localTime: localTime,
    flatten: flatten
  };
})();
