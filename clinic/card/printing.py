"""Printing the card and the referral note (PDF, and PNG for a phone), offline.

Templates and stylesheets live in ``printables/`` (``card.html`` with ``card.css`` plus
``card-pocket.css`` or ``card-sheet.css``; ``referral.html`` with ``referral.css``). Fonts
are the DejaVu files shipped in ``printables/fonts/``. The rendering is ``clinic.printing``:
only files inside ``printables/`` may be loaded, and any WeasyPrint warning makes the
render fail with ``PrintError`` so nothing is silently left out.
"""
from __future__ import annotations

import io

from clinic.card.codec import qr_matrix
from clinic.printing import PrintError, render_pdf, render_template

__all__ = ["PrintError", "card_pdf", "card_png", "html_to_pdf", "pdf_to_png", "qr_svg", "referral_pdf",
           "sheet_pdf"]

# The pocket card is 98 x 138 mm (fits an A6 pocket; four fit an A4 sheet with room for cut marks).
CARD_W_MM, CARD_H_MM = 98, 138
QR_MM = 54


def qr_svg(text: str, size_mm: float = QR_MM) -> str:
    """The QR code as inline SVG with a 4-module quiet zone, drawn as runs of dark modules."""
    m = qr_matrix(text)
    n = len(m)
    q = 4
    parts = []
    for y, row in enumerate(m):
        x = 0
        while x < n:
            if row[x]:
                start = x
                while x < n and row[x]:
                    x += 1
                parts.append(f"M{start + q} {y + q}h{x - start}v1h-{x - start}z")
            else:
                x += 1
    total = n + 2 * q
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="qr" viewBox="0 0 {total} {total}" '
            f'style="width:{size_mm}mm;height:{size_mm}mm" shape-rendering="crispEdges" role="img" '
            f'aria-label="QR code of the card"><rect width="{total}" height="{total}" fill="#fff"/>'
            f'<path fill="#000" d="{"".join(parts)}"/></svg>')


def html_to_pdf(html: str, stylesheets: list[str], what: str = "the document") -> bytes:
    """``clinic.printing.render_pdf`` under its older name (stylesheets are names in printables/)."""
    return render_pdf(html, stylesheets=stylesheets, what=what)


def card_pdf(view: dict) -> bytes:
    """The pocket card: front and back, one card per page."""
    html = render_template("card.html", cards=[view], layout="pocket", qr=qr_svg(view["qr_text"]))
    return render_pdf(html, stylesheets=["card.css", "card-pocket.css"], what="the pocket card")


def sheet_pdf(views: list[dict]) -> bytes:
    """Cards four to an A4 sheet with cut marks; backs on the second page, mirrored for
    long-edge duplex printing. Give one view four times for four copies."""
    if not views:
        raise PrintError("no cards to print")
    views = [dict(v, qr_svg=qr_svg(v["qr_text"])) for v in views]
    sheets = [views[i:i + 4] for i in range(0, len(views), 4)]
    html = render_template("card.html", sheets=sheets, layout="sheet")
    return render_pdf(html, stylesheets=["card.css", "card-sheet.css"], what="the sheet of cards")


def referral_pdf(view: dict, referral: dict) -> bytes:
    """A referral note (A4) from the same history: reason and question up front."""
    qr = qr_svg(view["qr_text"], 42) if view.get("qr_text") else ""
    html = render_template("referral.html", v=view, referral=referral, qr=qr)
    return render_pdf(html, stylesheets=["referral.css"], what="the referral note")


def pdf_to_png(pdf: bytes, dpi: int = 300, pages: list[int] | None = None) -> bytes:
    """PNG of a PDF's pages (stacked top to bottom with a gap) at ``dpi``."""
    import pypdfium2 as pdfium
    from PIL import Image
    doc = pdfium.PdfDocument(pdf)
    try:
        idx = pages if pages is not None else list(range(len(doc)))
        images = [doc[i].render(scale=dpi / 72).to_pil().convert("L") for i in idx]
    finally:
        doc.close()
    gap = int(dpi / 25.4 * 4)
    width = max(im.width for im in images)
    out = Image.new("L", (width, sum(im.height for im in images) + gap * (len(images) - 1)), 160)
    y = 0
    for im in images:
        out.paste(im, (0, y))
        y += im.height + gap
    buf = io.BytesIO()
    out.save(buf, format="PNG", optimize=True, dpi=(dpi, dpi))
    return buf.getvalue()


def card_png(view: dict, dpi: int = 200) -> bytes:
    """The pocket card (front above back) as a PNG for a phone."""
    return pdf_to_png(card_pdf(view), dpi=dpi)
