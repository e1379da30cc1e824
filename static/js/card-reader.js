/* Reads the card's QR code with the device camera. Nothing leaves the device: the decoded
   text is put in the scanner field of the same page and submitted to this server.

   Decoders, strongest first; a later one is used only when those before it are missing or
   cannot run here:
   1. the browser's own BarcodeDetector (Chrome on Android, ChromeOS, macOS);
   2. ZXing-C++ compiled to WebAssembly (static/vendor/zxing-wasm), its .wasm fetched from
      this server (the address is the page's data-zxing-wasm, never the library's CDN);
   3. jsQR (static/vendor/jsqr), plain JavaScript and weak on dense codes: the last fallback.
   The card's code is dense (QR version 15 to 25), which is where jsQR fails on a tilted, dimly
   lit card.

   After a few seconds without a card code the page says what to try and offers the photo
   upload in one tap. The camera needs a secure page (https, or http://localhost); elsewhere
   the scanner field and the photo upload still work. */
(function () {
  "use strict";
  var HELP_AFTER_MS = 4000;
  var PAUSE_MS = 40;            // between decodes: the phone stays responsive
  var MAX_ERRORS = 3;           // a decoder that fails this often in a row gives way to the next
  var ZXING_OPTIONS = { formats: ["QRCode"], tryHarder: true, maxNumberOfSymbols: 1 };

  var root = document.getElementById("camera");
  var start = document.getElementById("camera-start");
  var stop = document.getElementById("camera-stop");
  var video = document.getElementById("camera-video");
  var canvas = document.getElementById("camera-canvas");
  var note = document.getElementById("camera-note");
  var help = document.getElementById("camera-help");
  var photoButton = document.getElementById("camera-photo");
  var form = document.getElementById("scan-form");
  var field = document.getElementById("code");
  var via = document.getElementById("via");
  var decoderField = document.getElementById("decoder");
  var photoForm = document.getElementById("photo-form");
  var photoInput = document.getElementById("photo");
  if (!root || !start || !video || !canvas || !form) { return; }

  var stream = null;
  var timer = null;
  var startedAt = 0;
  var errors = 0;

  function say(text) { note.textContent = text; }
  function state(s) { root.setAttribute("data-state", s); }

  /* The current video frame as ImageData, its longer side at most maxSide pixels. */
  function frame(maxSide) {
    var vw = video.videoWidth, vh = video.videoHeight;
    var scale = Math.min(1, maxSide / Math.max(vw, vh));
    var w = Math.round(vw * scale), h = Math.round(vh * scale);
    if (canvas.width !== w || canvas.height !== h) { canvas.width = w; canvas.height = h; }
    var ctx = canvas.getContext("2d", { willReadFrequently: true });
    ctx.drawImage(video, 0, 0, w, h);
    return ctx.getImageData(0, 0, w, h);
  }

  function nativeDecoder() {
    var BD = window.BarcodeDetector;
    if (typeof BD !== "function" || typeof BD.getSupportedFormats !== "function") { return Promise.resolve(null); }
    return BD.getSupportedFormats().then(function (formats) {
      if (formats.indexOf("qr_code") < 0) { return null; }
      var detector = new BD({ formats: ["qr_code"] });
      return {
        name: "barcode-detector",
        read: function () {
          return detector.detect(video).then(function (found) {
            return found.map(function (b) { return b.rawValue; });
          });
        }
      };
    }).catch(function () { return null; });
  }

  function zxingDecoder() {
    var Z = window.ZXingWASM;
    var wasm = root.getAttribute("data-zxing-wasm");
    if (!Z || !wasm || typeof WebAssembly !== "object") { return Promise.resolve(null); }
    return Z.prepareZXingModule({
      overrides: {
        locateFile: function (path, prefix) { return /\.wasm$/.test(path) ? wasm : prefix + path; }
      },
      fireImmediately: true
    }).then(function () {
      return {
        name: "zxing-wasm",
        read: function () {
          // Full resolution up to 1920 px: a dense code filling a quarter of the picture has
          // about two pixels per module, and scaling down would lose it.
          return Z.readBarcodes(frame(1920), ZXING_OPTIONS).then(function (results) {
            return results.filter(function (r) { return r.isValid; }).map(function (r) { return r.text; });
          });
        }
      };
    }).catch(function () { return null; });  // no WebAssembly allowed here, or the .wasm did not load
  }

  function jsqrDecoder() {
    if (typeof window.jsQR !== "function") { return null; }
    return {
      name: "jsqr",
      read: function () {
        var img = frame(1000);  // jsQR is slow on large frames and gains little from them
        var found = window.jsQR(img.data, img.width, img.height, { inversionAttempts: "dontInvert" });
        return Promise.resolve(found && found.data ? [found.data] : []);
      }
    };
  }

  // The chain, strongest first. Each maker resolves to a decoder, or to null when it cannot run
  // here; a later one is made only when needed (a phone with its own detector loads no .wasm).
  var CHAIN = [nativeDecoder, zxingDecoder, jsqrDecoder];
  var chainAt = 0;
  var current = null;

  function nextDecoder() {
    if (chainAt >= CHAIN.length) { return Promise.resolve(null); }
    var make = CHAIN[chainAt++];
    return Promise.resolve(make()).then(function (d) { return d || nextDecoder(); });
  }

  function noDecoder() {
    halt();
    state("failed");
    help.hidden = false;
    say("No QR decoder could run in this browser. Use the scanner field or a photo of the card.");
  }

  function showHelp() {
    if (!help.hidden) { return; }
    help.hidden = false;
    state("help");
    say("Still looking for the card's QR code…");
  }

  function halt() {
    if (timer) { clearTimeout(timer); timer = null; }
    if (stream) { stream.getTracks().forEach(function (t) { t.stop(); }); stream = null; }
    video.hidden = true;
    stop.hidden = true;
    start.hidden = false;
  }

  function found(text, decoder) {
    halt();
    field.value = text;
    via.value = "camera";
    if (decoderField) { decoderField.value = decoder; }
    state("read");
    say("Card code read; checking it…");
    form.submit();
  }

  function handle(texts, decoder) {
    for (var i = 0; i < texts.length; i++) {
      if (texts[i] && texts[i].toUpperCase().indexOf("RHL") === 0) { found(texts[i], decoder); return true; }
    }
    if (texts.length) { say("That QR code is not an rhledger card. Hold the card's own QR code to the camera."); }
    return false;
  }

  function later() {
    if (stream) { timer = setTimeout(tick, PAUSE_MS); }
  }

  function giveWay() {
    current = null;
    errors = 0;
    nextDecoder().then(function (d) {
      current = d;
      if (d) { later(); } else { noDecoder(); }
    });
  }

  function tick() {
    timer = null;
    if (!stream || !current) { return; }
    if (help.hidden && Date.now() - startedAt >= HELP_AFTER_MS) { showHelp(); }
    if (video.readyState < video.HAVE_CURRENT_DATA || !video.videoWidth) { later(); return; }
    var d = current;
    root.setAttribute("data-decoder", d.name);
    var reading;
    try { reading = d.read(); } catch (e) { reading = Promise.reject(e); }
    reading.then(function (texts) {
      if (!stream) { return; }  // stopped while this frame was being read
      errors = 0;
      if (!handle(texts, d.name)) { later(); }
    }, function () {
      if (!stream) { return; }
      errors += 1;
      if (errors >= MAX_ERRORS) { giveWay(); } else { later(); }
    });
  }

  function constraints() {
    // A dense code needs pixels: ask for the camera's full-HD mode, uncropped and unscaled.
    return { audio: false, video: { facingMode: { ideal: "environment" }, width: { ideal: 1920 },
                                    height: { ideal: 1080 }, resizeMode: "none" } };
  }

  function keepFocusing(s) {
    var track = s.getVideoTracks()[0];
    var caps = track && track.getCapabilities ? track.getCapabilities() : {};
    if (caps.focusMode && caps.focusMode.indexOf("continuous") >= 0) {
      track.applyConstraints({ advanced: [{ focusMode: "continuous" }] }).catch(function () {});
    }
  }

  start.addEventListener("click", function () {
    if (!window.isSecureContext || !navigator.mediaDevices || !navigator.mediaDevices.getUserMedia) {
      say("The camera works only on a secure page (https or localhost). Use the scanner field or upload a photo.");
      help.hidden = false;
      return;
    }
    if (root.getAttribute("data-state") === "starting") { return; }  // a second tap while it starts
    say("Starting the camera…");
    state("starting");
    Promise.all([navigator.mediaDevices.getUserMedia(constraints()), current || nextDecoder()])
      .then(function (got) {
        var s = got[0];
        current = got[1];
        if (!current) {
          s.getTracks().forEach(function (t) { t.stop(); });
          noDecoder();
          return null;
        }
        stream = s;
        keepFocusing(s);
        video.srcObject = s;
        video.hidden = false;
        start.hidden = true;
        stop.hidden = false;
        help.hidden = true;
        startedAt = Date.now();
        state("looking");
        say("Looking for the QR code… hold the card flat and close enough to fill a third of the picture.");
        return video.play().then(tick);
      })
      .catch(function (err) {
        halt();
        state("failed");
        help.hidden = false;
        say("The camera could not start (" + (err && err.name ? err.name : "error") +
            "). Allow the camera, or use the scanner field or a photo.");
      });
  });

  stop.addEventListener("click", function () { halt(); state("stopped"); say("Camera stopped."); });

  if (photoButton && photoInput) {
    // One tap: the phone's own camera app takes the photo, and the server reads it.
    photoButton.addEventListener("click", function () { halt(); photoInput.click(); });
  }
  if (photoForm && photoInput) {
    photoInput.addEventListener("change", function () {
      if (photoInput.files && photoInput.files.length) { say("Sending the photo…"); photoForm.submit(); }
    });
  }
  window.addEventListener("pagehide", halt);
})();
