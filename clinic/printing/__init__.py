"""Everything printed goes through one path: templates and files of ``printables/`` to PDF.

- ``errors``: ``PrintError``, the one error of printing (card, referral note, district report)
- ``fetcher``: the WeasyPrint URL fetcher that serves files inside ``printables/`` and refuses
  everything else (other schemes, ``..``, paths or symlinks leading outside, unknown file types)
- ``glyphs``: which characters the bundled fonts draw; any other prints as a placeholder
- ``pdf``: ``render_template`` (the Jinja templates of ``printables/``, autoescaped) and
  ``render_pdf`` (WeasyPrint, with every warning it logs turned into ``PrintError``)

Nothing here imports anything else of ``clinic``, so the card and the reports can both use it.
WeasyPrint is imported only when a PDF is made: the command line starts without it.
"""
from __future__ import annotations

from clinic.printing.errors import PrintError
from clinic.printing.fetcher import PRINTABLES
from clinic.printing.pdf import render_pdf, render_template

__all__ = ["PRINTABLES", "PrintError", "render_pdf", "render_template"]
