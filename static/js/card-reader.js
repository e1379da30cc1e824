/* Reads the card's QR code with the device camera, using the vendored jsQR decoder
   (static/vendor/jsqr). Nothing leaves the device: the decoded text is put in the scanner
   field of the same page and submitted to this server.
   The camera needs a secure page (https, or http://localhost); elsewhere the scanner field
   and the photo upload still work. */
(function () {
  "use strict";
  var start = document.getElementById("camera-start");
  var stop = document.getElementById("camera-stop");
  var video = document.getElementById("camera-video");
  var canvas = document.getElementById("camera-canvas");
  var note = document.getElementById("camera-note");
  var form = document.getElementById("scan-form");
  var field = document.getElementById("code");
  var via = document.getElementById("via");
  if (!start || !video || !canvas || !form) { return; }
  var stream = null;
  var timer = null;

  function say(text) { note.textContent = text; }

  function halt() {
    if (timer) { cancelAnimationFrame(timer); timer = null; }
    if (stream) { stream.getTracks().forEach(function (t) { t.stop(); }); stream = null; }
    video.style.display = "none";
    stop.hidden = true;
    start.hidden = false;
  }

  function tick() {
    if (!stream) { return; }
    if (video.readyState === video.HAVE_ENOUGH_DATA) {
      // Decode at most ~1000 px wide: enough for a version-25 code filling a third of the frame.
      var scale = Math.min(1, 1000 / video.videoWidth);
      var w = Math.round(video.videoWidth * scale), h = Math.round(video.videoHeight * scale);
      canvas.width = w; canvas.height = h;
      var ctx = canvas.getContext("2d", { willReadFrequently: true });
      ctx.drawImage(video, 0, 0, w, h);
      var img = ctx.getImageData(0, 0, w, h);
      var found = window.jsQR(img.data, w, h, { inversionAttempts: "dontInvert" });
      if (found && found.data) {
        if (found.data.toUpperCase().indexOf("RHL") === 0) {
          halt();
          field.value = found.data;
          via.value = "camera";
          say("Card code read; checking it…");
          form.submit();
          return;
        }
        say("That QR code is not an rhledger card.");
      }
    }
    timer = requestAnimationFrame(tick);
  }

  start.addEventListener("click", function () {
    if (!window.jsQR) { say("The QR decoder did not load; use the scanner field or upload a photo."); return; }
    if (!window.isSecureContext || !navigator.mediaDevices || !navigator.mediaDevices.getUserMedia) {
      say("The camera works only on a secure page (https or localhost). Use the scanner field or upload a photo.");
      return;
    }
    navigator.mediaDevices.getUserMedia({ video: { facingMode: "environment" }, audio: false })
      .then(function (s) {
        stream = s;
        video.srcObject = s;
        video.style.display = "block";
        start.hidden = true;
        stop.hidden = false;
        say("Looking for the QR code… hold the card flat and close enough to fill a third of the picture.");
        return video.play();
      })
      .then(function () { timer = requestAnimationFrame(tick); })
      .catch(function (err) {
        halt();
        say("The camera could not start (" + (err && err.name ? err.name : "error") +
            "). Allow the camera, or use the scanner field or a photo.");
      });
  });
  stop.addEventListener("click", function () { halt(); say("Camera stopped."); });
  window.addEventListener("pagehide", halt);
})();
