/* rhledger: the request a <form data-api=...> makes, read from the form by the form/outbox
 * contract (DEVELOPERS.md), and the outbox entry that keeps it: JSON to the API with a
 * record id made here, and the form's values to re-open it later.
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var Q = rhl.Q, state = rhl.state, $ = rhl.$;

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
      // Sent later only in the name of whoever saved it (see replay in outbox/queue-send.js).
      user: state.user ? state.user.username : null, user_name: state.user ? state.user.name : null,
      form_url: location.pathname + location.search, form_values: req.formValues,
      created_at: new Date().toISOString()
    };
  }

  rhl.request = {
    build: buildRequest,
    makeEntry: makeEntry,
    controlsByName: controlsByName,
    formIds: formIds
  };
})();
