/* rhledger: form takeover. The submit of every <form data-api=...> goes through the outbox
 * (the form/outbox contract in DEVELOPERS.md): on 2xx it follows the answer's redirect; on
 * 422 it shows the errors by the fields; when the laptop cannot be reached, it keeps the
 * entry in the outbox (IndexedDB) and says so. An outbox entry is re-opened in its form
 * from /the/form#outbox=<key>.
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var Q = rhl.Q, state = rhl.state, $ = rhl.$, $all = rhl.$all, el = rhl.el, localTime = rhl.localTime;
  var request = rhl.request, messages = rhl.messages;
  var say = messages.say, showErrors = messages.showErrors, statusBox = messages.statusBox;

  function resetForm(form) {
    form.reset();
    form._rhIds = null;
    $all('input[type="hidden"][name$=".id"], input[type="hidden"][name="id"]', form).forEach(function (h) { h.value = ""; });
    // reset() brings back the saved copy's old "now" and "today": clear them again.
    if (state.cachedCopy) { rhl.kept.refreshStaleDefaults(form); }
  }

  function setBusy(form, busy) {
    form.setAttribute("aria-busy", busy ? "true" : "false");
    $all('button, input[type="submit"]', form).forEach(function (b) { b.disabled = busy; });
  }

  /* A form re-opened from the outbox replaces its entry: once sent, the entry goes; once
   * queued again under another key (an amendment gets a new one), the old entry goes. */
  function afterSaved(form, entry, sent) {
    var old = form.getAttribute("data-reopened");
    form.removeAttribute("data-reopened");
    if (old && (sent || old !== entry.key)) { return Q.remove(old); }
    return Promise.resolve();
  }

  function onSubmit(ev) {
    var form = ev.target;
    if (!(form instanceof HTMLFormElement) || !form.hasAttribute("data-api") || !Q) { return; }
    ev.preventDefault();
    if (form.getAttribute("aria-busy") === "true") { return; }
    var req, entry;
    try {
      req = request.build(form);
      entry = request.makeEntry(req, form);
    } catch (err) {
      say(form, "error", ["Nothing was saved: " + err.message]);
      return;
    }
    setBusy(form, true);
    Q.send(entry, rhl.pageToken()).then(function (r) {
      if (r.outcome === "sent") {
        state.reachable = true;
        return afterSaved(form, entry, true).then(function () {
          var to = r.data && r.data.redirect;
          if (to) { location.assign(to); return; }
          resetForm(form);
          say(form, "sent", ["Saved on the laptop."]);
        });
      }
      if (r.outcome === "offline" || r.outcome === "signin") {
        state.reachable = r.outcome !== "offline";
        entry.last_error = r.message;
        entry.attempts = 1;
        entry.last_attempt_at = new Date().toISOString();
        return Q.add(entry, r.outcome === "offline" ? "waiting" : "signin").then(function () {
          return afterSaved(form, entry, false);
        }).then(function () {
          resetForm(form);
          if (r.outcome === "offline") {
            say(form, "queued", [el("strong", { text: "Saved on this phone – waiting for the laptop." }),
              " It will be sent by itself when the laptop can be reached. ", messages.outboxLink()]);
            rhl.status.requestBackgroundSync();
          } else {
            say(form, "queued signin", [el("strong", { text: "Saved on this phone – sign in again to send it." }),
              " The laptop asked for a sign-in (" + r.message + "). ", el("a", { href: "/signin?next=/outbox", text: "Sign in" }),
              ", then open the ", messages.outboxLink("outbox"), "."]);
          }
          return rhl.status.refreshCounts();
        }, function (err) {
          say(form, "error", [el("strong", { text: "Not saved." }), " The laptop cannot be reached and this phone refused to keep the entry (" + err +
            "). Keep it on paper and enter it when the laptop is reachable."]);
        });
      }
      state.reachable = true;
      if (r.outcome === "rejected") {
        var errs = r.data && r.data.errors ? r.data.errors : { form: r.message };
        showErrors(form, errs);
      } else if (r.outcome === "duplicates") {
        messages.showDuplicates(form, r.data);
      } else if (r.outcome === "conflict") {
        messages.showConflict(form, r);
      } else {
        say(form, "error", [el("strong", { text: "Not saved." }), " " + r.message + ". Your values are still in the form."]);
      }
      return null;
    }).then(function () {
      setBusy(form, false);
      rhl.status.render();
    }, function (err) {
      setBusy(form, false);
      say(form, "error", ["Nothing was saved: " + err]);
    });
  }

  /* Re-open an outbox entry in its form: /the/form#outbox=<key>. */
  function reopenFromHash() {
    var m = /^#outbox=([0-9a-fA-F-]{36})$/.exec(location.hash);
    if (!m || !Q) { return; }
    Q.get(m[1]).then(function (entry) {
      var form = $("form[data-api]");
      if (!entry || !form) { return; }
      var groups = request.controlsByName(form);
      (entry.form_values || []).forEach(function (pair) {
        var name = pair[0], v = pair[1];
        var ctrls = groups[name];
        if (!ctrls || name === "expected_version") { return; }
        var vals = Array.isArray(v) ? v.map(String) : [String(v === undefined || v === null ? "" : v)];
        ctrls.forEach(function (c) {
          if (c.type === "checkbox" || c.type === "radio") { c.checked = vals.indexOf(c.value) >= 0; } else if (c.tagName === "SELECT" && c.multiple) {
            Array.prototype.forEach.call(c.options, function (o) { o.selected = vals.indexOf(o.value) >= 0; });
          } else if (c.type !== "hidden" || name === "id" || /\.id$/.test(name)) { c.value = vals[vals.length - 1]; }
        });
      });
      if (entry.method !== "PATCH") {
        var ids = request.formIds(form);
        (entry.form_values || []).forEach(function (pair) {
          if (pair[0] === "id") { ids.record = pair[1]; }
          if (/\.id$/.test(pair[0])) { ids[pair[0].slice(0, -3)] = pair[1]; }
        });
      }
      form.setAttribute("data-reopened", entry.key);
      var nodes = [el("strong", { text: "Re-opened from the outbox" }), " (saved on this phone " + localTime(entry.created_at) + "). "];
      if (entry.method === "PATCH") { nodes.push("The form shows the laptop's current version with your changes applied over it: check them, then save. "); }
      if (entry.errors) { nodes.push("Correct the fields marked below, then save. "); }
      nodes.push("Saving replaces the outbox entry.");
      say(form, "reopened", nodes);
      if (entry.errors) {
        var box = statusBox(form);
        showErrors(form, entry.errors);
        box.insertBefore(el("p", {}, nodes), box.firstChild);
      }
    });
  }

  rhl.forms = { onSubmit: onSubmit, reopenFromHash: reopenFromHash };
})();
