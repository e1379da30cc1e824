/* rhledger: forms that keep working when the laptop cannot be reached.
 *
 * Loaded on every page after static/vendor/idb-keyval/idb-keyval.umd.js and
 * static/js/net-queue.js. It
 *   - registers the service worker (/sw.js), which keeps the app shell and visited pages;
 *   - takes over the submit of every <form data-api=...> (the form/outbox contract in
 *     DEVELOPERS.md): JSON to the API with a record id made here; on 2xx follows the
 *     answer's redirect; on 422 shows the errors by the fields; when the laptop cannot
 *     be reached, keeps the entry in the outbox (IndexedDB) and says so;
 *   - sends the outbox at page load, on `online`, every 15 s while something waits, and
 *     asks for a background `sync` where the browser has it;
 *   - fills #net-state and #outbox-count, and renders the outbox page (#outbox-list).
 * Without JavaScript the forms post to their own page (the HTML fallback).
 */
(function () {
  "use strict";

  var Q = window.rhOutbox;
  var RETRY_MS = 15000;
  var PING_MS = 60000;
  var PING_TIMEOUT_MS = 5000;
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

  /* ---------- connection state and outbox count ---------- */

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
      return Q.replay({ csrf: pageToken(), why: why }).then(function (summary) {
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

  /* ---------- service worker ---------- */

  function registerWorker() {
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
      if (!state.cachedCopy) { warmPages(); }
    }).catch(function (err) {
      state.swError = "The offline helper (service worker) could not start: " + err;
      renderIndicator();
    });
    navigator.serviceWorker.addEventListener("message", function (ev) {
      if (ev.data && ev.data.type === "changed") { refreshCounts(); renderOutboxPage(); }
    });
  }

  function tellWorker(msg) {
    if (!("serviceWorker" in navigator)) { return; }
    navigator.serviceWorker.ready.then(function (reg) {
      if (reg.active) { reg.active.postMessage(msg); }
    });
  }

  /* Pages the phone should hold before the laptop goes out of reach: the booking form and
   * Today (named by the worker), every entry form linked from this page, links marked
   * data-offline-warm. Only while signed in. */
  function warmPages() {
    var signedIn = !!$('form[action$="/signout"]');
    if (!signedIn) { return; }
    var urls = [];
    $all('a[href*="/add/"], a[data-offline-warm]').forEach(function (a) {
      var u = new URL(a.href, location.href);
      if (u.origin === location.origin) { urls.push(u.pathname + u.search); }
    });
    tellWorker({ type: "warm", urls: urls, defaults: true });
  }

  /* ---------- a page that is the phone's saved copy ---------- */

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
    var at = metaContent("rhledger-offline-copy");
    if (!at) { return; }
    state.cachedCopy = at;
    state.reachable = false;
    var main = document.getElementById("main") || document.body;
    main.insertBefore(el("p", { "class": "offline-copy", role: "status", id: "offline-copy",
      text: "The laptop cannot be reached. This is the copy saved on this phone on " + localTime(at) +
            "; it may be out of date. What you save now is kept on the phone and sent later." }), main.firstChild);
    $all("form[data-api]").forEach(refreshStaleDefaults);
  }

  /* ---------- forms ---------- */

  function controlsByName(form) {
    var byName = {};
    Array.prototype.forEach.call(form.elements, function (c) {
      if (!c.name || c.disabled || c.name === "csrf_token") { return; }
      var t = (c.type || "").toLowerCase();
      if (t === "submit" || t === "button" || t === "reset" || t === "file" || t === "image") { return; }
      (byName[c.name] = byName[c.name] || []).push(c);
    });
    return byName;
  }

  /* The value a group of same-named controls gives, as the HTML fallback reads it:
   * several checkboxes -> list; one checkbox -> its value when checked, else the hidden
   * input before it ("no" on amend forms), else nothing; otherwise the last value. */
  function groupValue(ctrls, useDefaults) {
    var boxes = ctrls.filter(function (c) { return c.type === "checkbox"; });
    var checked = function (c) { return useDefaults ? c.defaultChecked : c.checked; };
    if (boxes.length > 1) {
      return boxes.filter(checked).map(function (c) { return c.value; });
    }
    if (boxes.length === 1) {
      if (checked(boxes[0])) { return boxes[0].value; }
      var hidden = ctrls.filter(function (c) { return c.type === "hidden"; });
      return hidden.length ? hidden[hidden.length - 1].value : undefined;
    }
    var radios = ctrls.filter(function (c) { return c.type === "radio"; });
    if (radios.length) {
      var on = radios.filter(checked)[0];
      return on ? on.value : undefined;
    }
    var last = ctrls[ctrls.length - 1];
    if (last.tagName === "SELECT" && last.multiple) {
      return Array.prototype.filter.call(last.options, function (o) { return useDefaults ? o.defaultSelected : o.selected; })
        .map(function (o) { return o.value; });
    }
    if (last.tagName === "SELECT" && useDefaults) {
      var def = Array.prototype.filter.call(last.options, function (o) { return o.defaultSelected; })[0];
      return def ? def.value : (last.options[0] ? last.options[0].value : "");
    }
    return useDefaults ? last.defaultValue : last.value;
  }

  function isEmpty(v) {
    return v === undefined || v === null || (typeof v === "string" && v.trim() === "") || (Array.isArray(v) && !v.length);
  }

  function sameValue(a, b) {
    return JSON.stringify(a === undefined ? "" : a) === JSON.stringify(b === undefined ? "" : b);
  }

  var RESERVED = { id: 1, kind: 1, woman_id: 1, pregnancy_id: 1, reason: 1, expected_version: 1, _shown: 1 };

  function formIds(form) {
    if (!form._rhIds) { form._rhIds = {}; }
    return form._rhIds;
  }

  function idFor(form, part, given) {
    var ids = formIds(form);
    if (given) { ids[part] = given; }
    if (!ids[part]) { ids[part] = Q.uuid(); }
    return ids[part];
  }

  /* The request a form makes, from the form/outbox contract. */
  function buildRequest(form) {
    var api = form.getAttribute("data-api");
    var method = (form.getAttribute("data-method") || "POST").toUpperCase();
    var groups = controlsByName(form);
    var values = {};
    Object.keys(groups).forEach(function (n) { values[n] = groupValue(groups[n], false); });
    var keep = [];  // [name, value] to re-open the form later
    var req = { method: method, url: api, kind: form.getAttribute("data-kind") || values.kind || "" };

    if (method === "PATCH") {
      var changes = {};
      Object.keys(groups).forEach(function (n) {
        if (RESERVED[n]) { return; }
        var now = values[n];
        if (!sameValue(now, groupValue(groups[n], true))) {
          changes[n] = now === undefined ? "" : now;
          keep.push([n, now]);
        }
      });
      var ev = parseInt(values.expected_version, 10);
      req.body = { changes: changes, reason: (values.reason || "").trim(), expected_version: isNaN(ev) ? null : ev };
      keep.push(["reason", values.reason || ""]);
      req.key = Q.uuid();
      req.recordId = (/\/records\/([^/?#]+)/.exec(api) || [])[1] || null;
    } else if (/\/bookings\/?$/.test(api)) {
      var parts = {};
      var top = {};
      Object.keys(values).forEach(function (n) {
        var dot = n.indexOf(".");
        if (dot > 0) {
          var p = n.slice(0, dot), f = n.slice(dot + 1);
          parts[p] = parts[p] || { fields: {} };
          if (f === "id") { parts[p].id = values[n]; } else if (!isEmpty(values[n])) { parts[p].fields[f] = values[n]; }
        } else if (n !== "kind") {
          top[n] = values[n];
        }
        if (!isEmpty(values[n])) { keep.push([n, values[n]]); }
      });
      var body = {};
      Object.keys(parts).forEach(function (p) {
        var fields = parts[p].fields;
        var required = p === "woman" || p === "pregnancy";
        // An optional part (typing, screen...) is sent only when something was entered in it.
        var filled = Object.keys(fields).some(function (f) { return f !== "status" && !isEmpty(fields[f]); });
        if (required || filled) { body[p] = { id: idFor(form, p, parts[p].id), fields: fields }; }
      });
      if (top.woman_id) { body.woman = { id: top.woman_id }; }
      if (top.confirm_not_duplicate !== undefined) {
        body.confirm_not_duplicate = ["yes", "true", "on", "1"].indexOf(String(top.confirm_not_duplicate).toLowerCase()) >= 0;
      }
      body.pregnancy = body.pregnancy || { id: idFor(form, "pregnancy"), fields: {} };
      req.body = body;
      req.key = body.pregnancy.id;
      keep.push(["pregnancy.id", body.pregnancy.id]);
      if (body.woman && body.woman.fields) { keep.push(["woman.id", body.woman.id]); }
      ["typing", "partner_typing", "screen"].forEach(function (p) { if (body[p]) { keep.push([p + ".id", body[p].id]); } });
    } else {
      var fields = {};
      Object.keys(values).forEach(function (n) {
        if (RESERVED[n]) { return; }
        if (!isEmpty(values[n])) { fields[n] = values[n]; keep.push([n, values[n]]); }
      });
      var rid = idFor(form, "record", values.id);
      req.body = { id: rid, kind: values.kind || req.kind, fields: fields };
      if (values.woman_id) { req.body.woman_id = values.woman_id; }
      if (values.pregnancy_id) { req.body.pregnancy_id = values.pregnancy_id; }
      req.key = rid;
      keep.push(["id", rid]);
    }
    req.formValues = keep;
    return req;
  }

  function entryLabel(form) {
    var given = form.getAttribute("data-label");
    if (given) { return given; }
    var h1 = $("h1");
    var who = $(".lead a");  // entry forms: "For <her name> · pregnancy booked ..."
    var text = (h1 ? h1.textContent : document.title).replace(/\s+/g, " ").trim();
    if (who && who.textContent.trim()) { text += " – " + who.textContent.replace(/\s+/g, " ").trim(); }
    return text.slice(0, 200);
  }

  function makeEntry(req, form) {
    return {
      key: req.key, method: req.method, url: req.url, body: req.body, kind: req.kind,
      record_id: req.recordId || null, label: entryLabel(form),
      // Sent later only in the name of whoever saved it (see net-queue.js replay).
      user: state.user ? state.user.username : null, user_name: state.user ? state.user.name : null,
      form_url: location.pathname + location.search, form_values: req.formValues,
      created_at: new Date().toISOString()
    };
  }

  /* --- messages by the form and by the fields --- */

  function statusBox(form) {
    var box = form.previousElementSibling;
    if (!box || !box.classList.contains("outbox-status")) {
      box = el("div", { "class": "outbox-status", role: "status", "aria-live": "polite" });
      form.parentNode.insertBefore(box, form);
    }
    return box;
  }

  function say(form, kind, nodes) {
    var box = statusBox(form);
    box.className = "outbox-status " + kind;
    box.setAttribute("data-outcome", kind);
    box.textContent = "";
    nodes.forEach(function (n) { box.appendChild(typeof n === "string" ? document.createTextNode(n) : n); });
    if (box.scrollIntoView) { box.scrollIntoView({ block: "nearest" }); }
    return box;
  }

  function clearErrors(form) {
    $all("[data-rh-error]", form).forEach(function (n) { n.parentNode.removeChild(n); });
    $all("[data-error-for]", form).forEach(function (n) {
      if (n.hasAttribute("data-rh-filled")) { n.textContent = ""; n.hidden = true; n.removeAttribute("data-rh-filled"); }
    });
    $all("[aria-invalid]", form).forEach(function (n) { n.removeAttribute("aria-invalid"); });
    $all(".has-error", form).forEach(function (n) { n.classList.remove("has-error"); });
  }

  function flatten(errors, prefix, out) {
    Object.keys(errors || {}).forEach(function (k) {
      var v = errors[k];
      var name = prefix ? prefix + "." + k : k;
      if (v && typeof v === "object" && !Array.isArray(v)) { flatten(v, name, out); } else { out[name] = Array.isArray(v) ? v.join("; ") : String(v); }
    });
    return out;
  }

  function labelOf(form, name, ctrl) {
    var lab = ctrl && ctrl.id ? form.querySelector('label[for="' + ctrl.id + '"]') : null;
    if (!lab && ctrl) {
      var fs = ctrl.closest("fieldset");
      lab = fs ? fs.querySelector("legend") : null;
    }
    return lab ? lab.textContent.replace("*", "").trim() : name;
  }

  /* Errors from a 422: next to each field ([data-error-for], #err-<field>, else a new
   * element after the input), and a summary above the form. */
  function showErrors(form, errors) {
    clearErrors(form);
    var flat = flatten(errors, "", {});
    var list = el("ul");
    Object.keys(flat).forEach(function (name) {
      var msg = flat[name];
      var esc = window.CSS && CSS.escape ? CSS.escape(name) : name.replace(/"/g, '\\"');
      var ctrl = form.querySelector('[name="' + esc + '"]:not([type="hidden"])');
      var label = labelOf(form, name, ctrl);
      var slot = form.querySelector('[data-error-for="' + esc + '"]') || document.getElementById("err-" + name);
      if (slot) {
        slot.textContent = label + " " + msg;
        slot.hidden = false;
        slot.setAttribute("data-rh-filled", "");
      } else if (ctrl) {
        slot = el("p", { "class": "field-error", "data-rh-error": "", id: "err-" + name, text: label + " " + msg });
        var holder = ctrl.closest(".field") || ctrl.parentNode;
        holder.appendChild(slot);
      }
      if (ctrl) {
        ctrl.setAttribute("aria-invalid", "true");
        var f = ctrl.closest(".field");
        if (f) { f.classList.add("has-error"); }
      }
      var item = el("li", {}, [ctrl && ctrl.id ? el("a", { href: "#" + ctrl.id, text: label }) : label, " " + msg]);
      list.appendChild(item);
    });
    var n = Object.keys(flat).length;
    say(form, "rejected", [el("p", { text: "Not saved on the laptop: please correct " + n + " field" + (n === 1 ? "" : "s") + ":" }), list]);
  }

  function outboxLink(text) {
    return el("a", { href: "/outbox", text: text || "See what waits in the outbox" });
  }

  function showDuplicates(form, data) {
    var list = el("ul");
    (data.duplicates || []).forEach(function (w) {
      var bits = [w.birth_date ? "born " + w.birth_date : (w.stated_age ? "age " + w.stated_age : ""), w.village, w.phone,
                  w.register_no ? "Reg. " + w.register_no : ""].filter(Boolean).join(" · ");
      list.appendChild(el("li", {}, [w.url ? el("a", { href: w.url, text: w.name }) : w.name, bits ? " " + bits : ""]));
    });
    if (!form.querySelector('[name="confirm_not_duplicate"]')) {
      var lab = el("label", { "class": "check confirm" }, [
        el("input", { type: "checkbox", name: "confirm_not_duplicate", value: "yes", required: "required" }),
        " This is a different woman: save anyway"]);
      var btn = form.querySelector('button[type="submit"], button:not([type])');
      form.insertBefore(lab, btn || null);
    }
    say(form, "duplicates", [el("p", { text: "Nothing was saved yet. A similar woman is on record; check she is not the same woman:" }), list,
      el("p", { text: "Open her record to book the pregnancy there, or tick “This is a different woman” and save again." })]);
  }

  function showConflict(form, r) {
    var nodes = [el("p", { text: "Not saved: " + (r.message || "the record was changed on the laptop meanwhile") + "." })];
    if (r.current) {
      nodes.push(el("p", { text: "The laptop now has version " + r.current.version + ". Your values are still in the form." }));
    }
    nodes.push(el("p", {}, [el("a", { href: location.pathname + location.search, text: "Reload the current version" }),
      " and apply your change again."]));
    say(form, "conflict", nodes);
  }

  function resetForm(form) {
    form.reset();
    form._rhIds = null;
    $all('input[type="hidden"][name$=".id"], input[type="hidden"][name="id"]', form).forEach(function (h) { h.value = ""; });
    // reset() brings back the saved copy's old "now" and "today": clear them again.
    if (state.cachedCopy) { refreshStaleDefaults(form); }
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
      req = buildRequest(form);
      entry = makeEntry(req, form);
    } catch (err) {
      say(form, "error", ["Nothing was saved: " + err.message]);
      return;
    }
    setBusy(form, true);
    Q.send(entry, pageToken()).then(function (r) {
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
              " It will be sent by itself when the laptop can be reached. ", outboxLink()]);
            requestBackgroundSync();
          } else {
            say(form, "queued signin", [el("strong", { text: "Saved on this phone – sign in again to send it." }),
              " The laptop asked for a sign-in (" + r.message + "). ", el("a", { href: "/signin?next=/outbox", text: "Sign in" }),
              ", then open the ", outboxLink("outbox"), "."]);
          }
          return refreshCounts();
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
        showDuplicates(form, r.data);
      } else if (r.outcome === "conflict") {
        showConflict(form, r);
      } else {
        say(form, "error", [el("strong", { text: "Not saved." }), " " + r.message + ". Your values are still in the form."]);
      }
      return null;
    }).then(function () {
      setBusy(form, false);
      renderIndicator();
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
      var groups = controlsByName(form);
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
        var ids = formIds(form);
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

  /* ---------- the outbox page ---------- */

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
      renderIndicator();
      // Through replay: it checks who is signed in, so an entry is sent only in its author's name.
      return ready.then(function () { return Q.replay({ keys: [key] }); }).then(function (summary) {
        state.sending = false;
        if (summary && !summary.busy) { state.reachable = !summary.offline; }
        renderIndicator();
      }, function (err) {
        state.sending = false;
        renderIndicator();
        window.alert("Could not send: " + err);
      });
    }).then(function () { return Promise.all([renderOutboxPage(), refreshCounts()]); });
  }

  function renderSavedPages() {
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

  /* ---------- start ---------- */

  function onSignout(ev) {
    var form = ev.target;
    if (form instanceof HTMLFormElement && /\/signout$/.test(form.getAttribute("action") || "")) {
      // The saved pages hold names; they go with the sign-out. The outbox stays: it was never sent.
      tellWorker({ type: "clear-pages" });
      Q.metaSet("user", null);
    }
  }

  function start() {
    if (!Q) {
      renderIndicator();
      if (window.console) { console.error("rhledger: net-queue.js did not load; forms post to the laptop directly"); }
      return;
    }
    markCachedCopy();
    var token = pageToken();
    if (token) { Q.setCsrf(token); }
    Q.metaGet("user").then(function (u) { state.user = state.user || u || null; });
    if (!state.cachedCopy && $('form[action$="/signout"]')) {
      Q.session().then(function (who) {
        if (who) { state.user = { username: who.user, name: who.name }; }
      }, function () { /* not reachable: the last known user stays */ });
    }
    registerWorker();
    document.addEventListener("submit", onSignout, true);
    document.addEventListener("submit", onSubmit);
    document.addEventListener("click", onOutboxClick);
    Q.onChange(function (msg) {
      if (msg && (msg.type === "changed" || msg.type === "replayed")) { refreshCounts(); renderOutboxPage(); }
    });
    window.addEventListener("online", function () { ping().then(function (ok) { if (ok) { sendOutbox("online"); } }); });
    window.addEventListener("offline", function () { state.reachable = false; renderIndicator(); });
    refreshCounts();
    renderOutboxPage();
    renderSavedPages();
    reopenFromHash();
    window.addEventListener("hashchange", reopenFromHash);
    ping().then(function (ok) { if (ok) { sendOutbox("load"); } });
    var lastPing = Date.now();
    setInterval(function () {
      if (document.hidden) { return; }
      var due = state.counts.waiting > 0 || Date.now() - lastPing >= PING_MS;
      if (!due) { return; }
      lastPing = Date.now();
      ping().then(function (ok) { if (ok && state.counts.waiting) { sendOutbox("timer"); } });
    }, RETRY_MS);
    renderIndicator();
  }

  window.rhForms = { buildRequest: buildRequest, sendOutbox: sendOutbox, state: state };

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
