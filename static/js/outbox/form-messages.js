/* rhledger: what a form taken over by the outbox says: a status box above the form
 * (sent, kept on the phone, not saved...) and, after a 422, the errors by the fields.
 * Part of the page-side outbox scripts (see static/js/outbox/core.js).
 */
(function () {
  "use strict";

  var rhl = window.rhl;
  var $all = rhl.$all, el = rhl.el, flatten = rhl.flatten;

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

  rhl.messages = {
    statusBox: statusBox,
    say: say,
    showErrors: showErrors,
    outboxLink: outboxLink,
    showDuplicates: showDuplicates,
    showConflict: showConflict
  };
})();
