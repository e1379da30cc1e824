/* rhledger: the connection indicator (#net-state) and the outbox count (#outbox-count),
 * and sending the outbox: at page load, on `online`, every 15 s while something waits
 * (see keepTrying), with a background `sync` asked for where the browser has it.
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var Q = rhl.Q, state = rhl.state, el = rhl.el;
  var RETRY_MS = 15000;
  var PING_MS = 60000;
  var PING_TIMEOUT_MS = 5000;

  function renderIndicator() {
    var net = document.getElementById("net-state");
    if (net) {
      var s, text, title;
      if (!Q) {
        s = "broken"; text = "Offline saving unavailable";
        title = "The outbox script did not load; forms are sent straight to the laptop only.";
      } else if (state.swError) {
        s = "insecure"; text = "Offline saving off";
        title = state.swError;
      } else if (state.sending) {
        s = "sending"; text = "Sending…"; title = "Sending what waits in the outbox to the laptop";
      } else if (state.reachable) {
        s = "online"; text = "Connected"; title = "The laptop can be reached";
      } else {
        s = "offline"; text = "Offline"; title = "The laptop cannot be reached: entries are kept on this phone and sent later";
      }
      net.setAttribute("data-state", s);
      net.setAttribute("title", title);
      net.setAttribute("role", "status");
      net.textContent = text;
      if (state.swError && !net.querySelector("a")) {
        net.appendChild(document.createTextNode(" "));
        net.appendChild(el("a", { href: "/setup/", text: "(set up)" }));
      }
    }
    var box = document.getElementById("outbox-count");
    if (box) {
      var c = state.counts;
      var parts = [];
      if (c.waiting) { parts.push(c.waiting + " waiting"); }
      if (c.attention) { parts.push(c.attention + " need" + (c.attention === 1 ? "s" : "") + " you"); }
      box.textContent = "";
      box.setAttribute("data-count", String(c.total));
      box.setAttribute("data-waiting", String(c.waiting));
      box.setAttribute("data-attention", String(c.attention));
      box.appendChild(el("a", { href: "/outbox", title: "Entries saved on this phone and not yet on the laptop",
                                text: "Outbox: " + (parts.length ? parts.join(", ") : "empty") }));
    }
  }

  function refreshCounts() {
    if (!Q) { return Promise.resolve(); }
    return Q.counts().then(function (c) {
      state.counts = c;
      renderIndicator();
    }, function (err) {
      state.counts = { total: 0, waiting: 0, attention: 0 };
      state.swError = "This browser will not let rhledger keep data on the phone (" + err + ").";
      renderIndicator();
    });
  }

  function ping() {
    if (!navigator.onLine) {
      state.reachable = false;
      renderIndicator();
      return Promise.resolve(false);
    }
    var ctl = typeof AbortController === "function" ? new AbortController() : null;
    var timer = ctl ? setTimeout(function () { ctl.abort(); }, PING_TIMEOUT_MS) : null;
    return fetch("/net/ping", { cache: "no-store", credentials: "same-origin", signal: ctl ? ctl.signal : undefined })
      .then(function (res) { return res.ok; }, function () { return false; })
      .then(function (ok) {
        if (timer) { clearTimeout(timer); }
        state.reachable = ok;
        renderIndicator();
        return ok;
      });
  }

  function sendOutbox(why) {
    if (!Q || state.sending) { return Promise.resolve(null); }
    return Q.counts().then(function (c) {
      state.counts = c;
      if (!c.waiting) { renderIndicator(); return null; }
      state.sending = true;
      renderIndicator();
      return Q.replay({ csrf: rhl.pageToken(), why: why }).then(function (summary) {
        state.sending = false;
        if (summary && !summary.busy) { state.reachable = !summary.offline; }
        return refreshCounts().then(function () { return summary; });
      }, function (err) {
        state.sending = false;
        renderIndicator();
        if (window.console) { console.error("rhledger: sending the outbox failed", err); }
        return null;
      });
    });
  }

  function requestBackgroundSync() {
    if (!("serviceWorker" in navigator) || !navigator.serviceWorker.controller) { return; }
    navigator.serviceWorker.ready.then(function (reg) {
      if (reg.sync && typeof reg.sync.register === "function") {
        return reg.sync.register(Q.SYNC_TAG);
      }
      return null;
    }).catch(function (err) {
      // Background sync is an extra; the page still sends on `online` and every 15 s.
      if (window.console) { console.warn("rhledger: background sync not available:", err); }
    });
  }

  /* Follow the browser's own idea of the network: `online` is only a hint, so the laptop is
   * pinged before sending. */
  function listenNetwork() {
    window.addEventListener("online", function () { ping().then(function (ok) { if (ok) { sendOutbox("online"); } }); });
    window.addEventListener("offline", function () { state.reachable = false; renderIndicator(); });
  }

  /* Every RETRY_MS while the page is visible: ping when something waits (then send it), else
   * once a PING_MS so the indicator stays true. */
  function keepTrying() {
    var lastPing = Date.now();
    setInterval(function () {
      if (document.hidden) { return; }
      var due = state.counts.waiting > 0 || Date.now() - lastPing >= PING_MS;
      if (!due) { return; }
      lastPing = Date.now();
      ping().then(function (ok) { if (ok && state.counts.waiting) { sendOutbox("timer"); } });
    }, RETRY_MS);
  }

  rhl.status = {
    render: renderIndicator,
    refreshCounts: refreshCounts,
    ping: ping,
    sendOutbox: sendOutbox,
    requestBackgroundSync: requestBackgroundSync,
    listenNetwork: listenNetwork,
    keepTrying: keepTrying
  };
})();
