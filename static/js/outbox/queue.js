/* rhledger: the outbox of forms saved on this device (IndexedDB), and its change notices.
 *
 * Shared by the pages and the service worker (importScripts); static/js/outbox/queue-send.js
 * adds the sending to the same object, window.rhOutbox (self.rhOutbox in the worker).
 * No DOM here. Needs static/vendor/idb-keyval/idb-keyval.umd.js loaded first.
 *
 * An outbox entry is one request that could not reach the laptop:
 *   {key, method, url, body, kind, label, form_url, form_values, created_at,
 *    status, attempts, last_attempt_at, last_error, errors, server_current, duplicates}
 * key is a UUID made on this device: for a new record it is the record's own id, for a
 * booking the pregnancy's id, for an amendment a fresh UUID. The server treats a second
 * POST of the same id as the same record (200, replay: true), so sending twice is safe.
 * An entry leaves the outbox only after a 2xx answer.
 *
 * status: "waiting"  laptop not reachable; sent by itself later
 *         "signin"   the laptop asked for a sign-in (401/403); sent after signing in again
 *         "conflict" the record was changed on the laptop meanwhile (409): the user decides
 *         "rejected" the laptop refused a value (422): the user re-opens and corrects
 *         "error"    any other answer; kept, sent again only when the user asks
 */
(function (root) {
  "use strict";

  var kv = root.idbKeyval;
  if (!kv) {
    throw new Error("rhledger outbox: static/vendor/idb-keyval/idb-keyval.umd.js must be loaded before outbox/queue.js");
  }

  var DB_ENTRIES = kv.createStore("rhledger-outbox", "entries");
  var DB_META = kv.createStore("rhledger-meta", "kv");
  var CHANNEL_NAME = "rhledger-outbox";
  var SENT_KEEP = 20;
  // Statuses sent again without asking the user.
  var AUTO_RETRY = { waiting: true, signin: true };

  var channel = null;
  try {
    channel = typeof BroadcastChannel === "function" ? new BroadcastChannel(CHANNEL_NAME) : null;
  } catch (e) {
    channel = null;
  }
  var listeners = [];

  function uuid() {
    var c = root.crypto;
    if (c && typeof c.randomUUID === "function") {
      return c.randomUUID();
    }
    if (!c || typeof c.getRandomValues !== "function") {
      throw new Error("this browser has no secure random numbers (crypto.getRandomValues); it cannot make record ids");
    }
    var b = new Uint8Array(16);
    c.getRandomValues(b);
    b[6] = (b[6] & 0x0f) | 0x40; // version 4
    b[8] = (b[8] & 0x3f) | 0x80; // RFC 4122 variant
    var h = [];
    for (var i = 0; i < 16; i++) {
      h.push((b[i] + 0x100).toString(16).slice(1));
    }
    return h.slice(0, 4).join("") + "-" + h.slice(4, 6).join("") + "-" + h.slice(6, 8).join("") + "-" +
      h.slice(8, 10).join("") + "-" + h.slice(10, 16).join("");
  }

  function nowText() {
    return new Date().toISOString();
  }

  /* --- change notification: this context, other tabs, the service worker --- */

  function onChange(fn) {
    listeners.push(fn);
  }

  function emit(msg, fromOutside) {
    listeners.forEach(function (fn) {
      try {
        fn(msg);
      } catch (e) {
        if (root.console) { root.console.error("rhledger outbox listener failed", e); }
      }
    });
    if (!fromOutside && channel) {
      channel.postMessage(msg);
    }
  }

  if (channel) {
    channel.onmessage = function (ev) { emit(ev.data, true); };
  }

  /* --- storage --- */

  function list() {
    return kv.values(DB_ENTRIES).then(function (vals) {
      return vals.sort(function (a, b) { return a.created_at < b.created_at ? -1 : a.created_at > b.created_at ? 1 : 0; });
    });
  }

  function get(key) {
    return kv.get(key, DB_ENTRIES);
  }

  function put(entry) {
    return kv.set(entry.key, entry, DB_ENTRIES).then(function () {
      emit({ type: "changed", key: entry.key, status: entry.status });
      return entry;
    });
  }

  function add(entry, status) {
    entry.status = status || "waiting";
    entry.created_at = entry.created_at || nowText();
    entry.attempts = entry.attempts || 0;
    return put(entry);
  }

  function remove(key) {
    return kv.del(key, DB_ENTRIES).then(function () {
      emit({ type: "changed", key: key, status: "removed" });
    });
  }

  function counts() {
    return list().then(function (entries) {
      var c = { total: entries.length, waiting: 0, attention: 0 };
      entries.forEach(function (e) {
        if (AUTO_RETRY[e.status]) { c.waiting += 1; } else { c.attention += 1; }
      });
      return c;
    });
  }

  function metaGet(name) {
    return kv.get(name, DB_META);
  }

  function metaSet(name, value) {
    return kv.set(name, value, DB_META);
  }

  function metaUpdate(name, fn) {
    return kv.update(name, fn, DB_META);
  }

  function setCsrf(token) {
    return token ? metaSet("csrf", token) : Promise.resolve();
  }

  function sentLog() {
    return metaGet("sent").then(function (v) { return v || []; });
  }

  function noteSent(entry, answer) {
    return kv.update("sent", function (old) {
      var log = (old || []).slice(0, SENT_KEEP - 1);
      log.unshift({ key: entry.key, label: entry.label, kind: entry.kind, created_at: entry.created_at,
                    sent_at: nowText(), replay: !!(answer && answer.replay),
                    redirect: (answer && answer.redirect) || null });
      return log;
    }, DB_META);
  }

  root.rhOutbox = {
    uuid: uuid,
    // For queue-send.js, which reports its sends through the same notices.
    nowText: nowText,
    emit: emit,
    list: list,
    get: get,
    add: add,
    put: put,
    remove: remove,
    counts: counts,
    setCsrf: setCsrf,
    sentLog: sentLog,
    noteSent: noteSent,
    onChange: onChange,
    metaGet: metaGet,
    metaSet: metaSet,
    metaUpdate: metaUpdate,
    SYNC_TAG: "rhledger-outbox",
    AUTO_RETRY: AUTO_RETRY
  };
})(typeof self !== "undefined" ? self : this);
