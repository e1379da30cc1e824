"""The patient-held card: every card of the demo (all four care sites), its QR text length, the
cost of making and reading one, the printed PDF, and whether each QR still reads from a photo
of a worn card.

The worn photo (``worn_photo``): the QR as printed (54 mm square with its quiet zone, as
``clinic.card.printing.qr_svg`` draws it) rasterised at 120 dpi with anti-aliasing, on a
paper-coloured card; the print faded (ink and paper pulled towards grey: black 0 -> 80, white
255 -> 215); rotated 3 degrees; Gaussian blur of 1.2 px (a quarter of a millimetre at
120 dpi: a photo slightly out of focus); saved as JPEG at quality 60; then read
by ``clinic.card.scan.qr_texts``, the app's own photo reader (zxing-cpp). A card reads when the
text read is exactly the card's. The largest card is also put through the same damage from its
real PDF page (pdfium at 120 dpi) to check the rasterisation stands in for the print, and
every card is read again at blurs of 1.0 and 1.5 px (``blur_sweep``): how many read depends
much on the blur, so say which one a figure used.
"""
from __future__ import annotations

import io
import statistics
import time
from pathlib import Path

SITES = ("clinic-a", "clinic-b", "clinic-c", "hospital")
DPI = 120
TILT_DEG = 3.0
FADE = (80, 215)
BLUR_PX = 1.2
BLUR_SWEEP = (1.0, 1.2, 1.5)
JPEG_QUALITY = 60
REPEAT = 20


def qr_image(text: str, dpi: int = DPI, size_mm: float | None = None):
    """The card's QR (quiet zone included) at ``dpi``, anti-aliased as a renderer would draw it."""
    from PIL import Image, ImageDraw

    from clinic.card.codec import qr_matrix
    from clinic.card.printing import QR_MM

    m = qr_matrix(text)
    n = len(m) + 8
    px = round((size_mm or QR_MM) / 25.4 * dpi)
    ss = 8
    big = Image.new("L", (px * ss, px * ss), 255)
    draw = ImageDraw.Draw(big)
    unit = px * ss / n
    for y, row in enumerate(m):
        for x, dark in enumerate(row):
            if dark:
                x0, y0 = (x + 4) * unit, (y + 4) * unit
                draw.rectangle([round(x0), round(y0), round(x0 + unit) - 1, round(y0 + unit) - 1], fill=0)
    return big.resize((px, px), Image.BOX)


def wear(im, *, tilt: float = TILT_DEG, fade=FADE, blur: float = BLUR_PX, quality: int = JPEG_QUALITY) -> bytes:
    """A photo of a worn card: on paper with a margin, faded, tilted, blurred, JPEG."""
    from PIL import Image, ImageFilter

    lo, hi = fade
    margin = max(20, im.width // 6)
    card = Image.new("L", (im.width + 2 * margin, im.height + 2 * margin), 255)
    card.paste(im, (margin, margin))
    card = card.point(lambda v: round(lo + v * (hi - lo) / 255))
    card = card.rotate(tilt, resample=Image.BICUBIC, expand=True, fillcolor=hi)
    card = card.filter(ImageFilter.GaussianBlur(blur))
    buf = io.BytesIO()
    card.save(buf, format="JPEG", quality=quality)
    return buf.getvalue()


def reads(photo: bytes, text: str) -> bool:
    from clinic.card.scan import ImageReadError, qr_texts

    try:
        return text in qr_texts(photo)
    except ImageReadError:
        return False


def pdf_page(pdf: bytes, dpi: int = DPI):
    import pypdfium2 as pdfium

    doc = pdfium.PdfDocument(pdf)
    try:
        return doc[0].render(scale=dpi / 72).to_pil().convert("L")
    finally:
        doc.close()


def demo_cards(root: Path, log, sites=SITES) -> list[dict]:
    """Issue the card of every pregnancy of the demo care ``sites``."""
    from clinic.card.issue import issue_card
    from clinic.config import load_settings
    from clinic.signing.trust import load_trust
    from clinic.store import Store
    from seed_demo.scenario import build_site

    cards = []
    for site in sites:
        d = root / f"demo-{site}"
        t = time.perf_counter()
        build_site(d, site, force=True)
        store, settings = Store(d), load_settings(d)
        trust = load_trust(d)
        for preg in store.pregnancies():
            ic = issue_card(d, store, settings, preg["id"], by="bench")
            cards.append({"site": site, "pregnancy_id": preg["id"], "text": ic.card.text, "view": ic.view,
                          "entries": ic.card.included, "omitted": ic.card.omitted, "qr_version": ic.card.qr_version,
                          "dir": d, "trust": trust, "history": store.history(preg["id"])})
        log(f"  demo site {site}: {sum(1 for c in cards if c['site'] == site)} cards "
            f"({time.perf_counter() - t:.0f} s)")
    return cards


def run(root: Path, log, sites=SITES, repeat: int = REPEAT) -> dict:
    from clinic.card.codec import make_card_text, read_card
    from clinic.card.printing import card_pdf
    from clinic.signing.keys import load_signing_key

    cards = demo_cards(root, log, sites)
    lengths = sorted(len(c["text"]) for c in cards)
    largest = max(cards, key=lambda c: len(c["text"]))
    typical_len = lengths[len(lengths) // 2]
    typical = next(c for c in cards if len(c["text"]) == typical_len)
    out: dict = {"sites": list(sites), "cards": len(cards),
                 "payload_chars": {"typical": typical_len, "largest": len(largest["text"]),
                                   "smallest": lengths[0], "mean": round(statistics.mean(lengths))},
                 "qr_version": {"typical": typical["qr_version"], "largest": largest["qr_version"]},
                 "cards_with_entries_left_out": sum(1 for c in cards if c["omitted"])}

    times = []
    for _ in range(3):
        t = time.perf_counter()
        card_pdf(largest["view"])
        times.append(time.perf_counter() - t)
    out["pdf_s"] = statistics.median(times)
    out["pdf_first_s"] = times[0]

    for name, c in (("largest", largest), ("typical", typical)):
        key = load_signing_key(c["dir"])
        w, p, e = c["history"]
        enc, dec = [], []
        for _ in range(repeat):
            t = time.perf_counter()
            made = make_card_text(w, p, e, key=key, issue=1, issued_at="2026-11-20T12:00:00Z",
                                  issuer_name="Bench", issuer_phone="")
            enc.append(1000 * (time.perf_counter() - t))
            t = time.perf_counter()
            reading = read_card(made.text, c["trust"])
            dec.append(1000 * (time.perf_counter() - t))
            if reading.trust != "trusted":
                raise RuntimeError(f"the demo card does not verify: {reading.reason}")
        suffix = "" if name == "largest" else "_typical"
        out["encode_sign_ms" + suffix] = statistics.median(enc)
        out["decode_verify_ms" + suffix] = statistics.median(dec)

    checked = cards
    images = [qr_image(c["text"]) for c in checked]  # making the QR matrix is the slow part
    failed = [len(c["text"]) for c, im in zip(checked, images, strict=True) if not reads(wear(im), c["text"])]
    ok_lengths = sorted(len(c["text"]) for c in checked)
    for n in failed:
        ok_lengths.remove(n)
    out["worn_photo"] = {
        "cards": len(checked), "read": len(checked) - len(failed), "failed_chars": sorted(failed),
        "longest_read_chars": max(ok_lengths, default=None), "shortest_failed_chars": min(failed, default=None),
        "largest_from_pdf_reads": reads(wear(pdf_page(card_pdf(largest["view"]))), largest["text"]),
        "blur_sweep": {str(b): sum(reads(wear(im, blur=b), c["text"]) for c, im in zip(checked, images, strict=True))
                       for b in BLUR_SWEEP},
        "dpi": DPI, "tilt_deg": TILT_DEG, "fade": list(FADE), "blur_px": BLUR_PX, "jpeg_quality": JPEG_QUALITY,
    }
    log(f"  cards: typical {typical_len} chars, largest {len(largest['text'])}; worn photo reads "
        f"{out['worn_photo']['read']} of {len(checked)}; PDF {out['pdf_s']:.2f} s")
    return out
