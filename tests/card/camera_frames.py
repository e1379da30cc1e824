"""A fake phone camera for the browser tests: printed cards as a camera sees them, as Y4M video.

Chromium plays a Y4M file as its camera (``--use-file-for-fake-video-capture``), looping, and
opens the file again at every ``getUserMedia``, so one browser can be shown one card after
another by rewriting the file between reads.

A frame is the card's front page as ``clinic.card.printing`` renders it, held in front of the
camera as a hand holds it: turned 3-8 degrees in the picture's plane and tipped as much away
from it (a perspective), filling a quarter to a half of the picture, on a dull desk, in dim
light that falls off to one side and towards the corners, slightly out of focus, with sensor
noise, and saved as JPEG (as a phone camera's pipeline would) before it becomes video.
"""
from __future__ import annotations

import io
import math
import time
from contextlib import contextmanager
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
from PIL import Image, ImageFilter

from clinic.card.codec import qr_matrix

# A phone held upright over a card: the portrait full-HD stream the reader asks the camera for
# (static/js/card-reader.js). At 720p a dense card filling a quarter of the picture has under
# two pixels per module, beyond what any decoder reads, the server's included.
FRAME = (1080, 1920)
FPS = 5


@dataclass(frozen=True)
class Pose:
    """How the card is held and lit in one test video."""

    angle: float     # degrees, turn in the picture's plane
    tilt: float      # degrees, tipped away from the camera about the card's horizontal axis
    area: float      # share of the picture the card covers
    light: float     # brightness of the card's white at the frame's centre, 0-1
    quality: int     # JPEG quality
    seed: int

    def describe(self) -> str:
        return (f"turned {self.angle:+.1f} deg, tipped {self.tilt:.1f} deg, {self.area:.0%} of the frame, "
                f"light {self.light:.2f}, JPEG q{self.quality}")


def poses(n: int) -> list[Pose]:
    """n poses spread over the ranges (both ends included), each card a different mix."""
    def spread(i, step):
        return 0.0 if n == 1 else ((i * step) % n) / (n - 1)
    out = []
    for i in range(n):
        k = 0.0 if n == 1 else i / (n - 1)
        out.append(Pose(angle=(3 + 5 * k) * (-1 if i % 2 == 0 else 1), tilt=3 + 5 * spread(i, 7),
                        area=0.25 + 0.25 * spread(i, 5), light=0.42 + 0.18 * spread(i, 3),
                        quality=55 + (i * 7) % 16, seed=i))
    return out


def card_front(view: dict, dpi: int = 200) -> Image.Image:
    """The front of the pocket card as printed (clinic.card.printing), greyscale."""
    from clinic.card import printing
    png = printing.pdf_to_png(printing.card_pdf(view), dpi=dpi, pages=[0])
    return Image.open(io.BytesIO(png)).convert("L")


def _homography(src, dst) -> tuple[float, ...]:
    """Coefficients of the perspective that maps each ``src`` point to its ``dst`` point."""
    a, b = [], []
    for (x, y), (u, v) in zip(src, dst, strict=True):
        a.append([x, y, 1, 0, 0, 0, -u * x, -u * y])
        b.append(u)
        a.append([0, 0, 0, x, y, 1, -v * x, -v * y])
        b.append(v)
    return tuple(np.linalg.solve(np.array(a, float), np.array(b, float)))


def _corners(card_size, pose: Pose, frame, rng) -> list[tuple[float, float]]:
    """Where the card's corners land in the frame."""
    cw, ch = card_size
    fw, fh = frame
    s = math.sqrt(pose.area * fw * fh / (cw * ch))
    w, h = cw * s, ch * s
    focal = 1.4 * fh
    tip, turn = math.radians(pose.tilt), math.radians(pose.angle)
    cx = fw / 2 + rng.uniform(-0.06, 0.06) * fw
    cy = fh / 2 + rng.uniform(-0.05, 0.05) * fh
    out = []
    for x, y in ((-w / 2, -h / 2), (w / 2, -h / 2), (w / 2, h / 2), (-w / 2, h / 2)):
        z = focal + y * math.sin(tip)
        px, py = x * focal / z, y * math.cos(tip) * focal / z
        out.append((cx + px * math.cos(turn) - py * math.sin(turn), cy + px * math.sin(turn) + py * math.cos(turn)))
    return out


@lru_cache(maxsize=2)
def _light(pose: Pose, frame, direction: float) -> np.ndarray:
    """Dim, uneven light: brighter on one side than the other, darker towards the corners."""
    fw, fh = frame
    xs = (np.arange(fw, dtype=np.float32) - fw / 2)[None, :]
    ys = (np.arange(fh, dtype=np.float32) - fh / 2)[:, None]
    side = (xs * math.cos(direction) + ys * math.sin(direction)) / max(fw, fh)
    corner2 = (xs / fw) ** 2 + (ys / fh) ** 2
    return pose.light * (1 + 0.9 * side) * (1 - 0.5 * corner2)


def camera_frame(card: Image.Image, pose: Pose, frame=FRAME, shake: int = 0) -> Image.Image:
    """One camera picture of the card (RGB, already through JPEG). ``shake`` varies the noise
    and moves the card by a pixel or two, as a hand does between frames."""
    held_by = np.random.default_rng(pose.seed)        # the same hand and lamp in every frame
    rng = np.random.default_rng(pose.seed * 1000 + shake)
    fw, fh = frame
    corners = _corners(card.size, pose, frame, held_by)
    d = held_by.uniform(0, 2 * math.pi)                # the side the light comes from
    if shake:
        dx, dy = rng.integers(-2, 3, size=2)
        corners = [(x + dx, y + dy) for x, y in corners]
    cw, ch = card.size
    coeffs = _homography(corners, [(0, 0), (cw, 0), (cw, ch), (0, ch)])
    # A dull desk, smooth enough to be drawn at a quarter size and enlarged.
    desk = Image.fromarray(np.clip(rng.normal(100, 12, (fh // 4, fw // 4)), 0, 255).astype(np.uint8))
    desk = desk.resize(frame, Image.Resampling.BILINEAR)
    held = card.transform(frame, Image.Transform.PERSPECTIVE, coeffs, Image.Resampling.BICUBIC)
    mask = Image.new("L", card.size, 255).transform(frame, Image.Transform.PERSPECTIVE, coeffs,
                                                    Image.Resampling.BILINEAR)
    grey = np.asarray(Image.composite(held, desk, mask), np.float32)
    # Blacks lifted (a little stray light), so the code's contrast is low; sensor noise.
    noise = rng.standard_normal(grey.shape, dtype=np.float32) * 4
    grey = grey * _light(pose, frame, d) + 16 + noise
    img = Image.fromarray(np.clip(grey, 0, 255).astype(np.uint8)).filter(ImageFilter.GaussianBlur(0.8))
    # Indoor light is warm; then the camera's JPEG.
    warm = img.convert("RGB").convert("RGB", (1.0, 0, 0, 0, 0, 0.94, 0, 0, 0, 0, 0.82, 0))
    buf = io.BytesIO()
    warm.save(buf, "JPEG", quality=pose.quality)
    return Image.open(io.BytesIO(buf.getvalue())).convert("RGB")


def desk_frame(frame=FRAME, seed: int = 0) -> Image.Image:
    """A picture with no card in it: the camera pointed at the desk."""
    rng = np.random.default_rng(seed)
    fw, fh = frame
    grey = np.clip(rng.normal(90, 14, (fh, fw)), 0, 255).astype(np.uint8)
    return Image.fromarray(grey).filter(ImageFilter.GaussianBlur(4)).convert("RGB")


def write_y4m(frames: list[Image.Image], path: Path, fps: int = FPS) -> Path:
    """YUV4MPEG2, 4:2:0 (the JPEG layout of chroma), the frames in order."""
    w, h = frames[0].size
    with open(path, "wb") as f:
        f.write(f"YUV4MPEG2 W{w} H{h} F{fps}:1 Ip A1:1 C420jpeg\n".encode())
        for im in frames:
            ycc = np.asarray(im.convert("YCbCr"), np.uint16)
            planes = [ycc[:, :, 0].astype(np.uint8)]
            for c in (1, 2):
                p = ycc[:, :, c]
                planes.append(((p[0::2, 0::2] + p[1::2, 0::2] + p[0::2, 1::2] + p[1::2, 1::2] + 2) // 4)
                              .astype(np.uint8))
            f.write(b"FRAME\n" + b"".join(p.tobytes() for p in planes))
    return path


def card_video(card: Image.Image, pose: Pose, path: Path, frames: int = 3) -> Path:
    """A short loop of the held card (each frame a little different)."""
    return write_y4m([camera_frame(card, pose, shake=k) for k in range(frames)], path)


def qr_image(text: str, px: int = 3, margin: int = 0, size: tuple[int, int] | None = None) -> Image.Image:
    """The bare QR code, flat and sharp, dark on light grey: ``px`` pixels a module, centred in
    ``size`` (or with ``margin`` pixels around it)."""
    m = qr_matrix(text)
    n = len(m)
    width, height = size or (n * px + 2 * margin, n * px + 2 * margin)
    img = np.full((height, width), 235, np.uint8)
    x0, y0 = (width - n * px) // 2, (height - n * px) // 2
    for r, row in enumerate(m):
        for c, dark in enumerate(row):
            if dark:
                img[y0 + r * px:y0 + (r + 1) * px, x0 + c * px:x0 + (c + 1) * px] = 16
    return Image.fromarray(img).convert("RGB")


def qr_video(text: str, path: Path, frames: int = 20) -> Path:
    """The bare QR code on a 640 x 480 picture, as the simplest camera."""
    return write_y4m([qr_image(text, size=(640, 480))] * frames, path, fps=10)


def fake_camera_args(video: Path) -> list[str]:
    """Chromium flags: the Y4M file is the camera, and the camera prompt is answered yes."""
    from tests.web.browser_fixtures import CHROMIUM_ARGS
    return [*CHROMIUM_ARGS, "--use-fake-ui-for-media-stream", "--use-fake-device-for-media-stream",
            f"--use-file-for-fake-video-capture={video}"]


# ---- driving the card reader in a browser that has the fake camera ---------------------------

@contextmanager
def camera_browser(video: Path):
    """Debian's Chromium whose camera plays ``video`` (rewrite the file to show another card)."""
    from playwright.sync_api import sync_playwright

    from tests.web.browser_fixtures import CHROMIUM
    if not Path(CHROMIUM).exists():
        pytest.skip(f"{CHROMIUM} is not installed (apt-get install chromium)")
    with sync_playwright() as pw:
        b = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=fake_camera_args(video))
        try:
            yield b
        finally:
            b.close()


def reader_page(browser, base_url: str, user: str, password: str, init_script: str | None = None,
                service_workers: str = "allow"):
    """A signed-in phone-sized page allowed to use the camera; its JavaScript errors in .errors,
    what its Content-Security-Policy refused in .csp.
    (``service_workers="block"`` when the test routes the page's requests: Playwright does not
    see what the service worker fetches.)"""
    from tests.web.browser_fixtures import PHONE, TIMEOUT_MS, is_csp_violation
    ctx = browser.new_context(base_url=base_url, viewport=PHONE, locale="en-GB", service_workers=service_workers)
    ctx.set_default_timeout(TIMEOUT_MS)
    ctx.grant_permissions(["camera"], origin=base_url)
    if init_script:
        ctx.add_init_script(init_script)
    page = ctx.new_page()
    page.errors = []
    page.on("pageerror", lambda exc: page.errors.append(str(exc)))
    # What the page's Content-Security-Policy refused, as the browser reports it on the console.
    page.csp = []
    page.on("console", lambda m: page.csp.append(m.text) if is_csp_violation(m.text) else None)
    page.goto("/signin")
    page.fill('input[name="username"]', user)
    page.fill('input[name="password"]', password)
    with page.expect_navigation():
        page.click('button[type="submit"]')
    assert "/signin" not in page.url, "sign-in failed"
    return page


@dataclass
class CameraRead:
    fields: dict          # what the reader submitted (code, via, decoder)
    seconds: float        # from the tap on "Start the camera" to the submission


def read_with_camera(page, timeout_ms: int) -> CameraRead:
    """Open the reader, tap "Start the camera" and wait for it to submit a card code."""
    from urllib.parse import parse_qs
    page.goto("/cards/")
    t0 = time.monotonic()
    with page.expect_request(lambda r: r.url.endswith("/cards/read") and r.method == "POST",
                             timeout=timeout_ms) as req:
        page.click("#camera-start")
    seconds = time.monotonic() - t0
    page.wait_for_load_state()
    fields = {k: v[-1] for k, v in parse_qs(req.value.post_data or "").items()}
    return CameraRead(fields, seconds)
