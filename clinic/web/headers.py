"""Security headers on every response, and no caching of anything that may show a patient.

The Content-Security-Policy allows scripts, styles, fonts, images and connections from the
laptop only, with no inline script, no inline ``<style>`` and no ``style=""`` attribute
(server-drawn SVG charts colour themselves with SVG presentation attributes, which CSP does
not govern); the card reader's pages may also compile WebAssembly (``WASM_ENDPOINTS``).
``frame-ancestors 'none'``: no other site may frame a page. Every answer but the versioned
static files is ``Cache-Control: no-store`` (the service worker keeps its own copies of pages
for offline use and drops them at sign-out).
"""
from __future__ import annotations

from flask import Flask, request

CSP = "; ".join((
    "default-src 'self'",
    "script-src 'self'",
    "style-src 'self'",
    "img-src 'self' data: blob:",   # the camera reader draws frames; QR images of the setup page
    "font-src 'self'",
    "connect-src 'self'",
    "media-src 'self' blob:",
    "worker-src 'self'",
    "manifest-src 'self'",
    "object-src 'none'",
    "base-uri 'none'",
    "form-action 'self'",
    "frame-ancestors 'none'",
))

# The card reader's pages decode the QR code with ZXing compiled to WebAssembly
# (static/js/card-reader.js): they, and only they, may compile WebAssembly. 'wasm-unsafe-eval'
# allows WebAssembly and nothing else: no JavaScript eval, no inline script.
WASM_ENDPOINTS = frozenset({"card.index", "card.read", "card.photo"})
CSP_WITH_WASM = CSP.replace("script-src 'self'", "script-src 'self' 'wasm-unsafe-eval'", 1)

HEADERS = {
    "Content-Security-Policy": CSP,
    "X-Content-Type-Options": "nosniff",
    "X-Frame-Options": "DENY",
    "Referrer-Policy": "no-referrer",
    "Cross-Origin-Opener-Policy": "same-origin",
    "Permissions-Policy": "camera=(self), microphone=(), geolocation=()",
}


def _secure_headers(resp):
    for k, v in HEADERS.items():
        resp.headers[k] = v
    if request.endpoint in WASM_ENDPOINTS:
        resp.headers["Content-Security-Policy"] = CSP_WITH_WASM
    # /sw.js and the manifest say no-cache themselves (the browser revalidates them).
    if not request.path.startswith("/static/") and "Cache-Control" not in resp.headers:
        resp.headers["Cache-Control"] = "no-store"
    return resp


def init_app(app: Flask) -> None:
    app.after_request(_secure_headers)
