/* rhledger: sending the outbox to the laptop, one entry or all that wait.
 *
 * Shared by the pages and the service worker (importScripts), loaded after
 * static/js/outbox/queue.js, whose rhOutbox object it completes with send, attempt,
 * session and replay. No DOM here.
 */
(function (root) {
  "use strict";

  var Q = root.rhOutbox;
  if (!Q) {
    throw new Error("rhledger outbox: static/js/outbox/queue.js must be loaded before outbox/queue-send.js");
  }

  var LOCK_NAME = "rhledger-outbox-send";
  var REQUEST_TIMEOUT_MS = 20000;
  var AUTO_RETRY = Q.AUTO_RETRY;
  // Gateway answers mean the laptop itself was not reached.
  var UNREACHABLE_STATUS = { 502: true, 503: true, 504: true };
  var nowText = Q.nowText, emit = Q.emit, list = Q.list, put = Q.put, remove = Q.remove,
      metaGet = Q.metaGet, metaSet = Q.metaSet, setCsrf = Q.setCsrf, noteSent = Q.noteSent;

  /* --- sending --- */

  function fetchWithTimeout(url, opts, ms) {
    if (typeof AbortController !== "function") {
      return fetch(url, opts);
    }
    var ctl = new AbortController();
    var timer = setTimeout(function () { ctl.abort(); }, ms);
    opts.signal = ctl.signal;
    return fetch(url, opts).then(function (res) {
      clearTimeout(timer);
      return res;
    }, function (err) {
      clearTimeout(timer);
      throw err;
    });
  }

  function readJson(res) {
    var type = res.headers.get("Content-Type") || "";
    if (type.indexOf("json") < 0) {
      return Promise.resolve(null);
    }
    return res.json().catch(function () { return null; });
  }

  function sameValue(a, b) {
    if (Array.isArray(a) || Array.isArray(b)) {
      return JSON.stringify(a || []) === JSON.stringify(b || []);
    }
    return String(a === undefined || a === null ? "" : a).trim() === String(b === undefined || b === null ? "" : b).trim();
  }

  /* An amendment whose answer was lost the first time comes back 409 the second time:
   * when the record is now exactly one version on with our values, it was ours. */
  function amendmentAlreadyApplied(entry, current) {
    if (!current || entry.method !== "PATCH" || !entry.body) {
      return false;
    }
    if (current.version !== entry.body.expected_version + 1) {
      return false;
    }
    var last = (current.amendments || [])[(current.amendments || []).length - 1];
    if (!last || !sameValue(last.reason, entry.body.reason)) {
      return false;
    }
    var changes = entry.body.changes || {};
    return Object.keys(changes).every(function (k) {
      return (last.changes && last.changes[k] !== undefined) || sameValue(current[k], changes[k]);
    });
  }

  function recordIdOf(entry) {
    if (entry.method === "PATCH") {
      var m = /\/records\/([^/?#]+)/.exec(entry.url);
      return m ? decodeURIComponent(m[1]) : null;
    }
    return entry.body && entry.body.id ? entry.body.id : null;
  }

  function fetchCurrent(entry, headers) {
    var id = recordIdOf(entry);
    if (!id) {
      return Promise.resolve(null);
    }
    return fetchWithTimeout("/api/v1/records/" + encodeURIComponent(id),
      { method: "GET", headers: { Accept: "application/json" }, credentials: "same-origin", cache: "no-store", redirect: "manual" },
      REQUEST_TIMEOUT_MS)
      .then(function (res) { return res.ok ? readJson(res) : null; })
      .then(function (data) { return data && data.record ? data.record : null; })
      .catch(function () { return null; });
  }

  /* One attempt. Resolves (never rejects) to {outcome, status, data, message}:
   * outcome "sent" | "offline" | "signin" | "conflict" | "duplicates" | "rejected" | "error". */
  function send(entry, csrfToken) {
    var tokenP = csrfToken ? Promise.resolve(csrfToken) : metaGet("csrf");
    return tokenP.then(function (token) {
      var headers = { "Content-Type": "application/json", Accept: "application/json",
                      "X-CSRF-Token": token || "", "X-Outbox-Key": entry.key,
                      // The phone's clock: the laptop warns when its own runs behind it.
                      "X-Client-Time": new Date().toISOString() };
      return fetchWithTimeout(entry.url, {
        method: entry.method, headers: headers, body: JSON.stringify(entry.body),
        credentials: "same-origin", cache: "no-store", redirect: "manual"
      }, REQUEST_TIMEOUT_MS).then(function (res) {
        return readJson(res).then(function (data) { return classify(entry, res, data, headers); });
      }, function (err) {
        return { outcome: "offline", status: 0, data: null,
                 message: err && err.name === "AbortError" ? "the laptop did not answer in time" : "the laptop could not be reached" };
      });
    });
  }

  function classify(entry, res, data, headers) {
    var s = res.status;
    var msg = data && data.error ? String(data.error) : "";
    if (res.type === "opaqueredirect" || s === 401) {
      return { outcome: "signin", status: s, data: data, message: msg || "sign in again on this phone to send it" };
    }
    if (s >= 200 && s < 300) {
      if (!data) {
        return { outcome: "error", status: s, data: null, message: "the laptop answered " + s + " without the JSON the outbox expects; nothing is assumed saved" };
      }
      return { outcome: "sent", status: s, data: data, message: "" };
    }
    if (UNREACHABLE_STATUS[s]) {
      return { outcome: "offline", status: s, data: data, message: "the laptop could not be reached (gateway answered " + s + ")" };
    }
    if (s === 403) {
      // A role refusal is final; an out-of-date security token is fixed by signing in / reloading.
      var token = /token/i.test(msg);
      return { outcome: token ? "signin" : "error", status: s, data: data, message: msg || "refused (403)" };
    }
    if (s === 409) {
      if (data && data.duplicates) {
        return { outcome: "duplicates", status: s, data: data, message: msg };
      }
      return fetchCurrent(entry, headers).then(function (current) {
        if (amendmentAlreadyApplied(entry, current)) {
          return { outcome: "sent", status: 200, data: { record: current, replay: true }, message: "" };
        }
        return { outcome: "conflict", status: s, data: data, current: current,
                 message: msg || "the record was changed on the laptop meanwhile" };
      });
    }
    if (s === 422 || s === 400) {
      return { outcome: "rejected", status: s, data: data, message: msg || "the laptop refused some values" };
    }
    return { outcome: "error", status: s, data: data, message: (msg || "the laptop answered " + s) };
  }

  var STATUS_OF = { offline: "waiting", signin: "signin", conflict: "conflict", duplicates: "conflict",
                    rejected: "rejected", error: "error" };

  /* Send one stored entry and record the outcome in the outbox. */
  function attempt(entry, csrfToken) {
    return send(entry, csrfToken).then(function (r) {
      if (r.outcome === "sent") {
        return noteSent(entry, r.data).then(function () { return remove(entry.key); })
          .then(function () {
            emit({ type: "sent", key: entry.key, label: entry.label, answer: r.data });
            return r;
          });
      }
      entry.attempts = (entry.attempts || 0) + 1;
      entry.last_attempt_at = nowText();
      entry.last_error = r.message;
      entry.status = STATUS_OF[r.outcome];
      entry.errors = r.outcome === "rejected" && r.data ? (r.data.errors || null) : null;
      entry.server_current = r.outcome === "conflict" ? (r.current || null) : entry.server_current || null;
      entry.server_version = r.data && r.data.current_version !== undefined ? r.data.current_version : null;
      entry.duplicates = r.outcome === "duplicates" ? r.data.duplicates : null;
      return put(entry).then(function () { return r; });
    });
  }

  /* Who is signed in on this device now, and the session's security token:
   * {user, csrf}; null when nobody is signed in; rejects when the laptop is not reachable. */
  function session() {
    return fetchWithTimeout("/api/v1/session", { method: "GET",
                                                 headers: { Accept: "application/json", "X-Client-Time": new Date().toISOString() },
      credentials: "same-origin", cache: "no-store", redirect: "manual" }, REQUEST_TIMEOUT_MS)
      .then(function (res) {
        if (UNREACHABLE_STATUS[res.status]) { throw new Error("the laptop could not be reached"); }
        if (!res.ok) { return null; }
        return readJson(res).then(function (data) {
          if (!data || !data.user) { return null; }
          var out = { user: data.user.username, name: data.user.display_name, csrf: data.csrf_token };
          return Promise.all([setCsrf(out.csrf), metaSet("user", { username: out.user, name: out.name })])
            .then(function () { return out; });
        });
      });
  }

  function withLock(fn) {
    var locks = root.navigator && root.navigator.locks;
    if (locks && typeof locks.request === "function") {
      return locks.request(LOCK_NAME, { ifAvailable: true }, function (lock) {
        return lock ? fn() : { busy: true, sent: 0, left: null, offline: false };
      });
    }
    return fn();
  }

  /* Send everything that may be sent without asking, oldest first; stop at the first
   * "not reachable" (the rest would fail the same way). */
  function replay(opts) {
    opts = opts || {};
    return withLock(function () {
      var summary = { busy: false, sent: 0, left: 0, offline: false, tried: 0 };
      return list().then(function (entries) {
        var todo = entries.filter(function (e) { return AUTO_RETRY[e.status] || (opts.keys && opts.keys.indexOf(e.key) >= 0); });
        if (!todo.length) { return finish(); }
        return session().then(function (who) {
          if (!who) {
            summary.signin = true;
            return finish();
          }
          return sendAll(todo, who);
        }, function () {
          summary.offline = true;
          return finish();
        });
      });

      function finish() {
        return list().then(function (left) {
          summary.left = left.length;
          emit({ type: "replayed", summary: summary });
          return summary;
        });
      }

      /* An entry is sent in the name of whoever saved it on this phone, never of the next user. */
      function sendAll(todo, who) {
        var i = 0;
        function next() {
          if (i >= todo.length || summary.offline) { return finish(); }
          var entry = todo[i++];
          if (entry.user && entry.user !== who.user) {
            if (entry.status === "signin" && entry.waiting_for === entry.user) { return next(); }
            entry.status = "signin";
            entry.waiting_for = entry.user;
            entry.last_error = "saved by " + (entry.user_name || entry.user) + " on this phone: " +
              (entry.user_name || entry.user) + " must sign in here to send it";
            return put(entry).then(next);
          }
          summary.tried += 1;
          return attempt(entry, who.csrf).then(function (r) {
            if (r.outcome === "sent") { summary.sent += 1; }
            if (r.outcome === "offline") { summary.offline = true; }
            if (r.outcome === "signin") { summary.signin = true; }
            return next();
          });
        }
        return next();
      }
    });
  }

  Q.send = send;
  Q.attempt = attempt;
  Q.replay = replay;
  Q.session = session;
})(typeof self !== "undefined" ? self : this);
