#!/usr/bin/env python3
"""Refresh the browser libraries vendored into static/vendor/ from the npm registry.

Nothing the app serves is fetched from the internet at run time: every library the
pages or the service worker use is copied here, with its licence and version, by this
script. Each library is pinned to one version and to the integrity hash npm reports for
that version's tarball; a tarball whose hash differs is refused.

    python scripts/refresh-vendor.py            # npm pack the pinned versions, copy, write VERSIONS.txt
    python scripts/refresh-vendor.py --check    # compare static/vendor with the pins (no network), exit 1 on drift

To upgrade a library: change its version, run once with --print-integrity to see the new
hash, check the library's changelog, paste the hash below and run again.
"""
from __future__ import annotations

import argparse
import base64
import hashlib
import json
import shutil
import subprocess
import sys
import tarfile
import tempfile
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
VENDOR = ROOT / "static" / "vendor"
VERSIONS_FILE = VENDOR / "VERSIONS.txt"


@dataclass(frozen=True)
class Library:
    name: str          # npm package name, also the folder under static/vendor/
    version: str       # exact version
    integrity: str     # npm "integrity" (sha512 of the tarball)
    files: dict        # path in the tarball (under package/) -> file name in static/vendor/<name>/
    used_for: str


LIBRARIES = (
    Library(
        name="idb-keyval",
        version="6.3.0",
        integrity="sha512-um+2dgAWmYsu615EXpWVwSmapJhON0G43t3Ka/EVaohzPQXSMqKEqeDK/oIW3Ow+BXaF2PvSc+oBTFp793A5Ow==",
        files={"dist/umd.js": "idb-keyval.umd.js", "LICENCE": "LICENSE"},
        used_for="IndexedDB outbox of forms saved on the phone (static/js/outbox/queue.js, page and service worker)",
    ),
    # The card reader's last-fallback QR decoder (static/vendor/jsqr/VERSION.txt is the card developer's note).
    Library(
        name="jsqr",
        version="1.4.0",
        integrity="sha512-dxLob7q65Xg2DvstYkRpkYtmKm2sPJ9oFhrhmudT1dZvNFFTlroai3AWSpLey/w5vMcLBXRgOJsbXpdN9HzU/A==",
        files={"dist/jsQR.js": "jsQR.js", "LICENSE": "LICENSE"},
        used_for="the camera card reader's last-fallback QR decoder, for a browser with neither BarcodeDetector "
                 "nor WebAssembly (static/js/card-reader.js)",
    ),
    # ZXing-C++ compiled to WebAssembly, reader build only (the writer and the full build are not
    # needed). The classic-script (IIFE) file defines window.ZXingWASM; card-reader.js points its
    # locateFile at the vendored .wasm, so the library's default CDN address is never used.
    # LICENSE is zxing-wasm's (MIT); LICENSE-third-party.txt beside it covers the C++ compiled into
    # the .wasm (ZXing-C++ and the zxing-wasm bindings, Apache-2.0) and is kept by hand.
    Library(
        name="zxing-wasm",
        version="3.1.6",
        integrity="sha512-mU7UNuvl+hOT+nlSOQTMHZ2tM8lRMsbjDIp5IO/+HmBl/FOq77q0OSZPJ3cm42A9c1MKU6Uve67FiGdkhsrT9g==",
        files={"dist/iife/reader/index.js": "zxing-reader.js", "dist/reader/zxing_reader.wasm": "zxing_reader.wasm",
               "LICENSE": "LICENSE"},
        used_for="the camera card reader's QR decoder where the browser has no BarcodeDetector "
                 "(static/js/card-reader.js; jsQR only as the last fallback)",
    ),
)


def sri(data: bytes) -> str:
    return "sha512-" + base64.b64encode(hashlib.sha512(data).digest()).decode()


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def npm_pack(lib: Library, dest: Path) -> Path:
    """Download the pinned tarball with npm's own client; return its path."""
    if shutil.which("npm") is None:
        sys.exit("Error: npm is not on PATH; install Node.js (it brings npm) to refresh static/vendor/")
    spec = f"{lib.name}@{lib.version}"
    proc = subprocess.run(["npm", "pack", spec, "--json", "--pack-destination", str(dest)],
                          capture_output=True, text=True, timeout=300)
    if proc.returncode != 0:
        sys.exit(f"Error: npm pack {spec} failed:\n{proc.stderr.strip()}")
    info = json.loads(proc.stdout)[0]
    return dest / info["filename"]


def extract(lib: Library, tarball: Path, check_integrity: bool) -> dict[str, bytes]:
    data = tarball.read_bytes()
    got = sri(data)
    if check_integrity and got != lib.integrity:
        sys.exit(f"Error: {lib.name}@{lib.version} tarball has integrity {got}, the pin says {lib.integrity}. "
                 f"Refusing to vendor it; check the version and update the pin in {Path(__file__).name} on purpose.")
    out = {}
    with tarfile.open(tarball, "r:gz") as tar:
        for src in lib.files:
            member = tar.getmember(f"package/{src}")
            fh = tar.extractfile(member)
            if fh is None:
                sys.exit(f"Error: {lib.name}: package/{src} is not a regular file")
            out[src] = fh.read()
    return out


def versions_text(rows: list[tuple[Library, dict[str, str]]]) -> str:
    lines = [
        "# Browser libraries vendored into static/vendor/ (written by scripts/refresh-vendor.py; do not edit by hand)",
        "# name version integrity-of-npm-tarball | file sha256 ... | used for",
    ]
    for lib, hashes in rows:
        files = " ".join(f"{name}={digest}" for name, digest in sorted(hashes.items()))
        lines.append(f"{lib.name} {lib.version} {lib.integrity} | {files} | {lib.used_for}")
    return "\n".join(lines) + "\n"


def refresh(only: set[str] | None, print_integrity: bool) -> None:
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for lib in LIBRARIES:
            target = VENDOR / lib.name
            if only and lib.name not in only:
                if target.exists():
                    rows.append((lib, {f.name: sha256(f) for f in sorted(target.iterdir()) if f.is_file()}))
                continue
            tarball = npm_pack(lib, Path(tmp))
            if print_integrity:
                print(f"{lib.name}@{lib.version} integrity {sri(tarball.read_bytes())}")
                continue
            files = extract(lib, tarball, check_integrity=True)
            target.mkdir(parents=True, exist_ok=True)
            for f in sorted(target.iterdir()):
                if f.name not in lib.files.values():
                    print(f"note: static/vendor/{lib.name}/{f.name} is not from the npm package; left as it is")
            hashes = {}
            for src, name in lib.files.items():
                (target / name).write_bytes(files[src])
                hashes[name] = hashlib.sha256(files[src]).hexdigest()
            rows.append((lib, hashes))
            print(f"vendored {lib.name} {lib.version} -> {target.relative_to(ROOT)}/ ({', '.join(sorted(hashes))})")
    if not print_integrity:
        VERSIONS_FILE.write_text(versions_text(rows), encoding="utf-8")
        print(f"wrote {VERSIONS_FILE.relative_to(ROOT)}")


def check() -> int:
    """Each pinned library is present with the files and hashes VERSIONS.txt records."""
    if not VERSIONS_FILE.exists():
        print(f"{VERSIONS_FILE.relative_to(ROOT)} is missing: run scripts/refresh-vendor.py")
        return 1
    recorded = {}
    for line in VERSIONS_FILE.read_text(encoding="utf-8").splitlines():
        if line.startswith("#") or not line.strip():
            continue
        head, files, _ = (part.strip() for part in line.split("|", 2))
        name, version, integrity = head.split()
        recorded[name] = (version, integrity, dict(f.split("=", 1) for f in files.split()))
    problems = []
    for lib in LIBRARIES:
        if lib.name not in recorded:
            problems.append(f"{lib.name}: not vendored (run scripts/refresh-vendor.py)")
            continue
        version, integrity, files = recorded[lib.name]
        if (version, integrity) != (lib.version, lib.integrity):
            problems.append(f"{lib.name}: VERSIONS.txt has {version}, the pin is {lib.version}")
        for name, digest in files.items():
            path = VENDOR / lib.name / name
            if not path.exists():
                problems.append(f"{lib.name}: {name} is missing")
            elif sha256(path) != digest:
                problems.append(f"{lib.name}: {name} differs from the vendored release")
        if "LICENSE" not in files:
            problems.append(f"{lib.name}: no LICENSE vendored")
    for p in problems:
        print(p)
    return 1 if problems else 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--check", action="store_true", help="verify static/vendor against the pins, no network")
    ap.add_argument("--only", action="append", metavar="NAME", help="refresh only this library (repeatable)")
    ap.add_argument("--print-integrity", action="store_true", help="print the tarball hashes of the pinned versions")
    args = ap.parse_args(argv)
    if args.check:
        return check()
    refresh(set(args.only) if args.only else None, args.print_integrity)
    return 0


if __name__ == "__main__":
    sys.exit(main())
