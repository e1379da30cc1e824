// District upload page: send each chosen bundle with its own fetch, showing progress and each
// file's result. Without JavaScript the form posts every file at once (same checks, one page).
(function () {
  "use strict";
  var form = document.getElementById("bundle-upload");
  if (!form || !window.fetch || !window.FormData) { return; }
  var input = document.getElementById("bundles");
  var list = document.getElementById("upload-results");
  var bar = document.getElementById("upload-progress");
  var tokenMeta = document.querySelector('meta[name="csrf-token"]');

  function line(text, cls) {
    var li = document.createElement("li");
    li.textContent = text;
    if (cls) { li.className = cls; }
    list.appendChild(li);
    return li;
  }

  function sendOne(file) {
    var li = line(file.name + ": sending…", "");
    var body = new FormData();
    body.append("bundle", file, file.name);
    return fetch(form.getAttribute("data-one"), {
      method: "POST", body: body, credentials: "same-origin",
      headers: { "X-CSRF-Token": tokenMeta ? tokenMeta.content : "" }
    }).then(function (resp) {
      return resp.json().catch(function () { return { status: "refused", message: file.name + ": the server answered " + resp.status }; });
    }).then(function (res) {
      var ok = res.status === "imported";
      li.className = ok ? "ok" : "refused";
      li.textContent = (ok ? "Imported: " : "Refused: ") + (res.message || res.error || file.name);
    }).catch(function () {
      li.className = "refused";
      li.textContent = "Refused: " + file.name + " could not be sent (is the laptop's server still running?)";
    });
  }

  form.addEventListener("submit", function (ev) {
    var files = Array.prototype.slice.call(input.files || []);
    if (!files.length) { return; }  // let the server say what is missing
    ev.preventDefault();
    list.textContent = "";
    bar.hidden = false;
    bar.max = files.length;
    bar.value = 0;
    var chain = Promise.resolve();
    files.forEach(function (f) {
      chain = chain.then(function () { return sendOne(f); }).then(function () { bar.value += 1; });
    });
    chain.then(function () { line("Done: " + files.length + " file(s). Open the coverage report to see the month.", ""); });
  });
})();
