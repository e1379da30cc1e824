#!/usr/bin/env python3
"""Copy the fonts every printout needs into printables/fonts/, from Debian's Noto packages.

A name in any script of the regions rhledger serves must print (cards, referral notes, the
district report). Printing loads fonts from printables/ only, so the fonts are bundled: the
regular weight of each script's Noto Sans (bold is synthesised), Noto Sans CJK SC cut down to
the GB 2312 characters (all the hanzi of everyday names), and Noto Color Emoji cut down to
single code points. Each file's licence (SIL Open Font License 1.1) is copied beside it from
the package's copyright file; FONTS.txt lists files, packages, versions and how they were cut.

    apt-get install fonts-noto-core fonts-noto-cjk fonts-noto-color-emoji
    python scripts/bundle-fonts.py

Run again after adding a script to SCRIPTS (and add its family to printables/fonts.css).
"""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "printables" / "fonts"
NOTO = Path("/usr/share/fonts/truetype/noto")
CJK = Path("/usr/share/fonts/opentype/noto/NotoSansCJK-Regular.ttc")
CJK_SC_INDEX = 2  # JP, KR, SC, TC, HK, then the Mono faces
# Scripts of Africa, South and South-East Asia and China, each a Noto Sans family (regular).
SCRIPTS = ("Ethiopic", "Arabic", "Tifinagh", "NKo", "Vai", "Devanagari", "Bengali", "Gurmukhi", "Gujarati",
           "Oriya", "Tamil", "Telugu", "Kannada", "Malayalam", "Sinhala", "Thai", "Lao", "Myanmar", "Khmer")
EMOJI_RANGES = ("U+00A9,U+00AE,U+203C,U+2049,U+2122,U+2139,U+2194-21AA,U+231A-23FF,U+24C2,U+25AA-25FE,"
                "U+2600-27BF,U+2934-2935,U+2B05-2B55,U+3030,U+303D,U+3297,U+3299,U+1F000-1FAFF")
PACKAGES = {"fonts-noto-core": "LICENSE-Noto.txt", "fonts-noto-cjk": "LICENSE-NotoCJK.txt",
            "fonts-noto-color-emoji": "LICENSE-NotoColorEmoji.txt"}


def gb2312_text() -> str:
    """Every character of GB 2312 (symbols, punctuation and the 6,763 hanzi)."""
    chars = []
    for hi in list(range(0xA1, 0xAA)) + list(range(0xB0, 0xF8)):
        for lo in range(0xA1, 0xFF):
            try:
                chars.append(bytes([hi, lo]).decode("gb2312"))
            except UnicodeDecodeError:
                pass
    return "".join(chars)


def version(pkg: str) -> str:
    return subprocess.run(["dpkg-query", "-W", "-f", "${Version}", pkg], check=True, capture_output=True,
                          text=True).stdout


def subset(src: Path, out: Path, *args: str) -> None:
    subprocess.run([sys.executable, "-m", "fontTools.subset", str(src), f"--output-file={out}", *args], check=True)


def main() -> int:
    missing = [p for p in [CJK, NOTO / "NotoColorEmoji.ttf"] + [NOTO / f"NotoSans{s}-Regular.ttf" for s in SCRIPTS]
               if not p.is_file()]
    if missing:
        print(f"missing: {', '.join(map(str, missing))}; apt-get install {' '.join(PACKAGES)}", file=sys.stderr)
        return 1
    OUT.mkdir(parents=True, exist_ok=True)
    lines = ["Fonts of the printouts (printables/fonts.css names each family). DejaVu: see LICENSE-DejaVu.txt.", ""]
    for s in SCRIPTS:
        name = f"NotoSans{s}-Regular.ttf"
        shutil.copyfile(NOTO / name, OUT / name)
        lines.append(f"{name}  fonts-noto-core {version('fonts-noto-core')}, copied as is; LICENSE-Noto.txt")
    text = OUT / ".gb2312.txt"
    text.write_text(gb2312_text(), encoding="utf-8")
    try:
        subset(CJK, OUT / "NotoSansSC-GB2312.otf", f"--font-number={CJK_SC_INDEX}", f"--text-file={text}",
               "--unicodes=U+3000-303F,U+FF00-FFEF")
    finally:
        text.unlink()
    lines.append(f"NotoSansSC-GB2312.otf  fonts-noto-cjk {version('fonts-noto-cjk')}: Noto Sans CJK SC "
                 f"(face {CJK_SC_INDEX} of NotoSansCJK-Regular.ttc) cut to GB 2312 and CJK punctuation with "
                 f"fontTools; LICENSE-NotoCJK.txt")
    subset(NOTO / "NotoColorEmoji.ttf", OUT / "NotoColorEmoji-subset.ttf", f"--unicodes={EMOJI_RANGES}",
           "--layout-features=")
    lines.append(f"NotoColorEmoji-subset.ttf  fonts-noto-color-emoji {version('fonts-noto-color-emoji')}: single "
                 f"code points only (no sequences) with fontTools; LICENSE-NotoColorEmoji.txt")
    for pkg, licence in PACKAGES.items():
        shutil.copyfile(Path("/usr/share/doc") / pkg / "copyright", OUT / licence)
    (OUT / "FONTS.txt").write_text("\n".join(lines) + "\n", encoding="utf-8")
    total = sum(p.stat().st_size for p in OUT.iterdir() if p.suffix in (".ttf", ".otf"))
    print(f"{OUT}: {total / 1e6:.1f} MB of fonts")
    return 0


if __name__ == "__main__":
    sys.exit(main())
