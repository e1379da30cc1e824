"""HTML to PDF with WeasyPrint (CSS paged media), offline and strict.

Relative URLs resolve against ``base`` (``printables/`` unless a caller says otherwise) and
every file is loaded through ``clinic.printing.fetcher``. Any warning or error WeasyPrint logs
while rendering (an unsupported CSS property, a font it cannot use, an image it left out)
makes the render fail with ``PrintError``: a printout is exactly as designed or not at all.
"""
from __future__ import annotations

import functools
import logging
import threading
from collections.abc import Sequence
from contextlib import contextmanager
from pathlib import Path

from jinja2 import Environment, FileSystemLoader, StrictUndefined, TemplateNotFound, select_autoescape

from clinic.printing.errors import PrintError
from clinic.printing.fetcher import PRINTABLES, fetcher_class

# WeasyPrint's logger is global: one render at a time keeps each render's warnings its own.
_LOCK = threading.Lock()


@functools.cache
def _env() -> Environment:
    # Autoescape: record text (names, notes, reasons) is printed as text, never read as markup.
    return Environment(loader=FileSystemLoader(str(PRINTABLES)), autoescape=select_autoescape(["html"]),
                       undefined=StrictUndefined, trim_blocks=True, lstrip_blocks=True)


def render_template(name: str, **context) -> str:
    """A Jinja template of ``printables/`` rendered to HTML (autoescaped, undefined names raise)."""
    try:
        template = _env().get_template(name)
    except TemplateNotFound:
        raise PrintError(f"the template {name!r} is not in {PRINTABLES}; the printables ship with rhledger") from None
    return template.render(**context)


class _Collect(logging.Handler):
    def __init__(self):
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record):
        self.messages.append(record.getMessage())


@contextmanager
def _weasyprint_problems():
    """The messages WeasyPrint logs at WARNING or above while the block runs."""
    logger = logging.getLogger("weasyprint")
    handler = _Collect()
    level = logger.level
    if logger.getEffectiveLevel() > logging.WARNING:
        logger.setLevel(logging.WARNING)  # a quieter logging setup must not hide a problem
    logger.addHandler(handler)
    try:
        yield handler.messages
    finally:
        logger.removeHandler(handler)
        logger.setLevel(level)


def render_pdf(html: str, *, stylesheets: Sequence[str] = (), base: Path = PRINTABLES,
               what: str = "the document") -> bytes:
    """PDF bytes of ``html`` with ``stylesheets`` (names of files in ``base``).

    Only files inside ``base`` may be loaded. PrintError, naming ``what`` was being printed,
    when anything is refused or WeasyPrint logs any warning."""
    import weasyprint
    from weasyprint.text.fonts import FontConfiguration
    from weasyprint.urls import FatalURLFetchingError

    from clinic.printing.glyphs import faces_css, printable

    root = Path(base).resolve()
    fetcher = fetcher_class()(root)
    html = printable(html)  # a character no bundled font has prints as a placeholder, not a warning
    with _LOCK, _weasyprint_problems() as problems:
        try:
            # One font configuration for the page and the stylesheets given here: without it
            # WeasyPrint skips their @font-face rules and the system's fonts stand in.
            fonts = FontConfiguration()
            doc = weasyprint.HTML(string=html, base_url=root.as_uri() + "/", url_fetcher=fetcher)
            css = [weasyprint.CSS(url=(root / s).as_uri(), url_fetcher=fetcher, font_config=fonts)
                   for s in stylesheets]
            faces = faces_css(html)  # the script fonts this document's text needs
            if faces:
                css.insert(0, weasyprint.CSS(string=faces, base_url=root.as_uri() + "/", url_fetcher=fetcher,
                                             font_config=fonts))
            pdf = doc.write_pdf(stylesheets=css, font_config=fonts)
        except FatalURLFetchingError as e:
            cause = e if isinstance(e, PrintError) else (e.__cause__ or e)
            raise PrintError(f"could not print {what}: {cause}") from None
    reasons = list(fetcher.refused)
    if problems:
        reasons.append("WeasyPrint reported problems: " + "; ".join(problems))
    if reasons:
        raise PrintError(f"could not print {what}: " + "; ".join(reasons))
    return pdf
