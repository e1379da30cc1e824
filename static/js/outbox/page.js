/* rhledger: the /outbox page (#outbox-list, #outbox-sent): what waits on this phone, why,
 * a conflict beside the laptop's current record, and per entry: send now, send a booking
 * flagged as a possible duplicate anyway, re-open the form, discard.
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var Q = rhl.Q, state = rhl.state, el = rhl.el, localTime = rhl.localTime, flatten = rhl.flatten;

  var STATUS_TEXT = {
    waiting: "Waiting for the laptop",
    signin: "Waiting: sign in again to send",
    conflict: "Conflict: changed on the laptop meanwhile",
    rejected: "Refused by the laptop: needs correcting",
    error: "Not sent: the laptop answered with an error"
  };

  function fieldTable(rows) {
    var t = el("table", { "class": "outbox-values" });
    t.appendChild(el("thead", {}, [el("tr", {}, [el("th", { text: "Field" }), el("th", { text: "On the laptop now" }), el("th", { text: "Yours (on this phone)" })])]));
    var tb = el("tbody");
    rows.forEach(function (r) { tb.appendChild(el("tr", {}, [el("th", { text: r[0] }), el("td", { text: r[1] }), el("td", { text: r[2] })])); });
    t.appendChild(tb);
    return t;
  }

  function show(v) {
    if (v === undefined || v === null || v === "") { return "—"; }
    if (Array.isArray(v)) { return v.join(", ") || "—"; }
    if (typeof v === "object") { return JSON.stringify(v); }
    return String(v);
  }

  function entryFields(entry) {
    var b = entry.body || {};
    if (entry.method === "PATCH") { return b.changes || {}; }
    if (b.fields) { return b.fields; }
    var out = {};
    ["woman", "pregnancy", "typing", "partner_typing", "screen"].forEach(function (p) {
      Object.keys((b[p] && b[p].fields) || {}).forEach(function (f) { out[p + "." + f] = b[p].fields[f]; });
    });
    return out;
  }

  function entryCard(entry) {
    var li = el("li", { "class": "outbox-entry status-" + entry.status, "data-key": entry.key, "data-status": entry.status });
    li.appendChild(el("h3", { text: entry.label || entry.kind }));
    li.appendChild(el("p", { "class": "outbox-meta", text: (STATUS_TEXT[entry.status] || entry.status) + " · saved on this phone " +
      localTime(entry.created_at) + (entry.user_name || entry.user ? " by " + (entry.user_name || entry.user) : "") + (entry.attempts ? " · tried " + entry.attempts + "×, last " + localTime(entry.last_attempt_at) : "") }));
    if (entry.last_error && entry.status !== "waiting") { li.appendChild(el("p", { "class": "outbox-error", text: "Laptop said: " + entry.last_error })); }
    var mine = entryFields(entry);
    if (entry.status === "conflict" && entry.server_current) {
      var cur = entry.server_current;
      li.appendChild(el("p", { text: "The laptop's record is now version " + cur.version +
        (cur.amended_by ? ", last changed by " + cur.amended_by + " " + localTime(cur.amended_at) : "") + ". Nothing was overwritten." }));
      li.appendChild(fieldTable(Object.keys(mine).map(function (k) { return [k, show(cur[k]), show(mine[k])]; })));
    } else if (entry.status === "conflict" && entry.duplicates) {
      var dl = el("ul");
      entry.duplicates.forEach(function (w) { dl.appendChild(el("li", {}, [w.url ? el("a", { href: w.url, text: w.name }) : w.name, w.village ? " · " + w.village : "", w.birth_date ? " · born " + w.birth_date : ""])); });
      li.appendChild(el("p", { text: "Similar women are already on record; check she is not one of them:" }));
      li.appendChild(dl);
    } else {
      var d = el("dl", { "class": "outbox-fields" });
      Object.keys(mine).forEach(function (k) { d.appendChild(el("div", {}, [el("dt", { text: k }), el("dd", { text: show(mine[k]) })])); });
      li.appendChild(d);
    }
    if (entry.errors) {
      var ul = el("ul", { "class": "outbox-errors" });
      var flat = flatten(entry.errors, "", {});
      Object.keys(flat).forEach(function (k) { ul.appendChild(el("li", { text: k + ": " + flat[k] })); });
      li.appendChild(ul);
    }
    var actions = el("p", { "class": "outbox-actions" });
    function button(text, act, cls) { return el("button", { type: "button", "data-act": act, "data-key": entry.key, "class": cls || "", text: text }); }
    if (entry.status !== "conflict" && entry.status !== "rejected") { actions.appendChild(button("Send now", "send", "primary")); }
    if (entry.duplicates) { actions.appendChild(button("Not the same woman: send anyway", "send-new-woman", "primary")); }
    if (entry.form_url) { actions.appendChild(button("Re-open the form", "reopen")); }
    actions.appendChild(button("Discard", "discard", "danger"));
    li.appendChild(actions);
    return li;
  }

  function renderOutboxPage() {
    var host = document.getElementById("outbox-list");
    if (!host || !Q) { return Promise.resolve(); }
    return Promise.all([Q.list(), Q.sentLog()]).then(function (res) {
      var entries = res[0], sent = res[1];
      host.textContent = "";
      if (!entries.length) {
        host.appendChild(el("p", { "class": "outbox-empty", text: "Nothing waits on this phone: everything entered here is on the laptop." }));
      } else {
        host.appendChild(el("p", { text: entries.length + " entr" + (entries.length === 1 ? "y is" : "ies are") +
          " saved on this phone and not yet on the laptop." }));
        var ul = el("ul", { "class": "outbox-entries" });
        entries.forEach(function (e) { ul.appendChild(entryCard(e)); });
        host.appendChild(ul);
      }
      var sentHost = document.getElementById("outbox-sent");
      if (sentHost) {
        sentHost.textContent = "";
        if (sent.length) {
          var sl = el("ul", { "class": "outbox-sent" });
          sent.forEach(function (s) {
            sl.appendChild(el("li", {}, [s.redirect ? el("a", { href: s.redirect, text: s.label || s.kind }) : (s.label || s.kind),
              " · sent " + localTime(s.sent_at) + (s.replay ? " (the laptop already had it)" : "")]));
          });
          sentHost.appendChild(sl);
        } else {
          sentHost.appendChild(el("p", { text: "Nothing sent from the outbox yet." }));
        }
      }
    });
  }

  function onOutboxClick(ev) {
    var b = ev.target.closest ? ev.target.closest("button[data-act]") : null;
    if (!b || !Q) { return; }
    var key = b.getAttribute("data-key");
    var act = b.getAttribute("data-act");
    Q.get(key).then(function (entry) {
      if (!entry) { return renderOutboxPage(); }
      if (act === "discard") {
        if (!window.confirm("Discard this entry? It was never saved on the laptop and will be lost.")) { return null; }
        return Q.remove(key);
      }
      if (act === "reopen") {
        location.assign(entry.form_url + "#outbox=" + entry.key);
        return null;
      }
      b.disabled = true;
      var ready = Promise.resolve();
      if (act === "send-new-woman") {
        // The user checked the similar women and says she is another one.
        entry.body.confirm_not_duplicate = true;
        entry.status = "waiting";
        entry.duplicates = null;
        ready = Q.put(entry);
      }
      state.sending = true;
      rhl.status.render();
      // Through replay: it checks who is signed in, so an entry is sent only in its author's name.
      return ready.then(function () { return Q.replay({ keys: [key] }); }).then(function (summary) {
        state.sending = false;
        if (summary && !summary.busy) { state.reachable = !summary.offline; }
        rhl.status.render();
      }, function (err) {
        state.sending = false;
        rhl.status.render();
        window.alert("Could not send: " + err);
      });
    }).then(function () { return Promise.all([renderOutboxPage(), rhl.status.refreshCounts()]); });
  }

  rhl.page = { render: renderOutboxPage, onClick: onOutboxClick };
})();
