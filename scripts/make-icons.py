#!/usr/bin/env python3
"""Draw rhledger's app icons into static/icons/: a white drop with a minus sign (RhD
negative) on the app's blue. One geometry, written as SVG and drawn as PNG with Pillow.

    python scripts/make-icons.py
"""
from __future__ import annotations

import math
from pathlib import Path

from PIL import Image, ImageDraw

OUT = Path(__file__).resolve().parent.parent / "static" / "icons"
BLUE = (29, 78, 137)       # --brand in static/css/app.css
WHITE = (255, 255, 255)
SUPERSAMPLE = 4


def drop_geometry(scale: float, size: float):
    """Tip, tangent points, circle centre and radius of the drop, in pixels of a size×size
    square, the drop filling ``scale`` of it."""
    cx, cy, r, tip_y = 0.5, 0.6, 0.22, 0.18
    d = cy - tip_y
    alpha = math.asin(r / d)
    beta = math.pi / 2 - alpha
    tx, ty = r * math.sin(beta), cy - r * math.cos(beta)

    def px(x, y):  # scale about the centre of the square
        return ((0.5 + (x - 0.5) * scale) * size, (0.5 + (y - 0.5) * scale) * size)

    return {"tip": px(cx, tip_y), "right": px(cx + tx, ty), "left": px(cx - tx, ty),
            "centre": px(cx, cy), "r": r * scale * size,
            "bar": (px(cx - 0.12, cy + 0.005), px(cx + 0.12, cy + 0.055))}


def svg(scale=1.0, size=512, rounded=True) -> str:
    g = drop_geometry(scale, size)
    f = lambda p: f"{p[0]:.1f} {p[1]:.1f}"  # noqa: E731
    (bx0, by0), (bx1, by1) = g["bar"]
    bg = (f'<rect width="{size}" height="{size}" rx="{size * 0.18:.0f}" fill="#1d4e89"/>' if rounded
          else f'<rect width="{size}" height="{size}" fill="#1d4e89"/>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {size} {size}" width="{size}" height="{size}">'
            f'<title>rhledger</title>{bg}'
            f'<path d="M{f(g["tip"])} L{f(g["right"])} A{g["r"]:.1f} {g["r"]:.1f} 0 1 1 {f(g["left"])} Z" fill="#fff"/>'
            f'<rect x="{bx0:.1f}" y="{by0:.1f}" width="{bx1 - bx0:.1f}" height="{by1 - by0:.1f}" '
            f'rx="{(by1 - by0) / 2:.1f}" fill="#1d4e89"/></svg>\n')


def png(size: int, scale: float, rounded: bool, transparent: bool) -> Image.Image:
    big = size * SUPERSAMPLE
    img = Image.new("RGBA", (big, big), (0, 0, 0, 0) if transparent else BLUE + (255,))
    d = ImageDraw.Draw(img)
    if rounded:
        d.rounded_rectangle((0, 0, big - 1, big - 1), radius=int(big * 0.18), fill=BLUE + (255,))
    g = drop_geometry(scale, big)
    cx, cy = g["centre"]
    r = g["r"]
    d.ellipse((cx - r, cy - r, cx + r, cy + r), fill=WHITE + (255,))
    d.polygon([g["tip"], g["right"], g["centre"], g["left"]], fill=WHITE + (255,))
    (bx0, by0), (bx1, by1) = g["bar"]
    d.rounded_rectangle((bx0, by0, bx1, by1), radius=(by1 - by0) / 2, fill=BLUE + (255,))
    return img.resize((size, size), Image.LANCZOS)


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    (OUT / "icon.svg").write_text(svg(), encoding="utf-8")
    (OUT / "icon-maskable.svg").write_text(svg(scale=0.72, rounded=False), encoding="utf-8")
    outputs = {
        "icon-192.png": png(192, 1.0, True, True),
        "icon-512.png": png(512, 1.0, True, True),
        # Maskable: full bleed, the drop inside the central safe circle (80 %).
        "icon-maskable-192.png": png(192, 0.72, False, False),
        "icon-maskable-512.png": png(512, 0.72, False, False),
        # iOS rounds the corners itself and dislikes transparency.
        "apple-touch-icon.png": png(180, 0.9, False, False),
        "favicon-32.png": png(32, 1.0, True, True),
    }
    for name, img in outputs.items():
        img.save(OUT / name, optimize=True)
        print(f"wrote static/icons/{name}")
    print("wrote static/icons/icon.svg, icon-maskable.svg")


if __name__ == "__main__":
    main()
