"""The only way a printed document may load a file: from ``printables/``, by a file URL.

Printing must never reach the network nor read the rest of the disk, whatever text a record
holds. Jinja autoescape keeps a name such as ``<img src=...>`` from becoming markup; this
fetcher is the second wall if markup were ever to slip through. It refuses:

- every scheme but ``file`` (``http``, ``https``, ``ftp``, ``data`` ...) and file URLs naming a host;
- any ``..`` segment, even one that would land back inside;
- a path that, once symlinks are followed, is not a file inside the root (absolute paths
  elsewhere, symlinks pointing out, folders, missing files);
- file types that are not a stylesheet, a font or an image.

A refusal raises an error that is both ``PrintError`` and WeasyPrint's
``FatalURLFetchingError``, so WeasyPrint stops the rendering instead of leaving the resource
out, and is listed in the fetcher's ``refused`` in case WeasyPrint caught it on the way.
"""
from __future__ import annotations

import functools
from pathlib import Path, PurePosixPath
from urllib.parse import unquote, urlsplit

from clinic.printing.errors import PrintError

PRINTABLES = Path(__file__).resolve().parents[2] / "printables"
MEDIA_TYPES = {".css": "text/css", ".ttf": "font/ttf", ".otf": "font/otf", ".woff": "font/woff",
               ".woff2": "font/woff2", ".svg": "image/svg+xml", ".png": "image/png", ".jpg": "image/jpeg",
               ".jpeg": "image/jpeg", ".gif": "image/gif"}


def printable_path(url: str, root: Path = PRINTABLES) -> Path:
    """The file inside ``root`` that ``url`` names; PrintError saying why when it may not be read."""
    root = Path(root).resolve()
    where = f"printing loads only stylesheets, fonts and images inside {root}"
    parts = urlsplit(url)
    if parts.scheme.lower() != "file":
        raise PrintError(f"refused to load {url[:200]!r}: {where}")
    if parts.netloc not in ("", "localhost"):
        raise PrintError(f"refused to load {url!r}: a file URL naming host {parts.netloc!r}; {where}")
    raw = unquote(parts.path)
    if ".." in PurePosixPath(raw).parts:
        raise PrintError(f"refused to load {url!r}: the path climbs with '..'; {where}")
    path = Path(raw).resolve()
    if not path.is_relative_to(root):
        raise PrintError(f"refused to load {url!r}: it leads to {path}, outside; {where}")
    if not path.is_file():
        raise PrintError(f"refused to load {url!r}: no such file; {where}")
    if path.suffix.lower() not in MEDIA_TYPES:
        raise PrintError(f"refused to load {url!r}: {path.suffix or 'no extension'} is not one of "
                         f"{', '.join(MEDIA_TYPES)}; {where}")
    return path


@functools.cache
def fetcher_class():
    """The WeasyPrint URL fetcher class (built on first use so WeasyPrint loads only to print).

    ``fetcher_class()(root)`` serves files of ``root`` (default ``printables/``)."""
    from weasyprint.urls import FatalURLFetchingError, URLFetcher, URLFetcherResponse

    class ResourceRefused(PrintError, FatalURLFetchingError):
        """A refused URL: PrintError for our callers, fatal for WeasyPrint."""

    class PrintablesFetcher(URLFetcher):
        def __init__(self, root: Path = PRINTABLES):
            super().__init__(fail_on_errors=True)
            self.root = Path(root).resolve()
            # Kept as well as raised: parts of WeasyPrint (SVG drawing) catch every exception.
            self.refused: list[str] = []

        def fetch(self, url, headers=None):
            try:
                path = printable_path(url, self.root)
            except PrintError as e:
                self.refused.append(str(e))
                raise ResourceRefused(str(e)) from None
            return URLFetcherResponse(path.as_uri(), body=path.read_bytes(),
                                      headers={"Content-Type": MEDIA_TYPES[path.suffix.lower()]})

    return PrintablesFetcher
