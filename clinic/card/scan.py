"""Finding the card's QR code in a photo or a scan, with zxing-cpp."""
from __future__ import annotations

import io

from PIL import Image, ImageOps, UnidentifiedImageError

MAX_PIXELS = 40_000_000  # a 40-megapixel photo is the most a phone sends


class ImageReadError(ValueError):
    """The file is not an image, or no QR code could be found in it; the message says what to try."""


def _open(data: bytes) -> Image.Image:
    if not data:
        raise ImageReadError("the file is empty")
    try:
        im = Image.open(io.BytesIO(data))
        if im.width * im.height > MAX_PIXELS:
            raise ImageReadError(f"the image is {im.width} x {im.height} pixels; send one under 40 megapixels")
        im.load()
    except (UnidentifiedImageError, OSError, SyntaxError, ValueError, Image.DecompressionBombError) as e:
        if isinstance(e, ImageReadError):
            raise
        raise ImageReadError("the file is not an image this installation can read (use PNG or JPEG)") from None
    im = ImageOps.exif_transpose(im)  # a phone photo taken sideways
    return im.convert("L")


def qr_texts(data: bytes) -> list[str]:
    """Texts of every QR code in the image, largest first. ImageReadError when there is none."""
    import zxingcpp
    im = _open(data)
    attempts = [im]
    # A large photo may hide a small code, a small one may be too coarse: try other scales.
    if max(im.size) > 2400:
        s = 2400 / max(im.size)
        attempts.append(im.resize((int(im.width * s), int(im.height * s)), Image.LANCZOS))
    if max(im.size) < 900:
        attempts.append(im.resize((im.width * 2, im.height * 2), Image.LANCZOS))
    for attempt in attempts:
        found = zxingcpp.read_barcodes(attempt, formats=zxingcpp.BarcodeFormat.QRCode)
        texts = [r.text for r in found if r.valid and r.text]
        if texts:
            return texts
    raise ImageReadError("no QR code was found in the image: photograph the card flat, filling most of "
                         "the picture, in good light without glare, and try again")
