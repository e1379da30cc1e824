"""Text cells every CSV export writes the same way, so no spreadsheet evaluates them.

A cell that begins with =, +, -, @, a tab or a carriage return is a formula to Excel,
LibreOffice and Google Sheets (spreadsheet formula injection): a name, a village, a lot
number or a facility name typed at a clinic could then run on the district's computer.
``safe_cell`` writes such a cell with a leading apostrophe, which the spreadsheet shows as
typed ('+000 700 ... reads +000 700 ...). Numbers stay numbers. Rows end with CRLF
(RFC 4180): Python's csv writer then quotes any cell holding a carriage return, so it
cannot start a row of its own.
"""
from __future__ import annotations

LINE_END = "\r\n"
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def safe_cell(v):
    """A CSV cell that a spreadsheet will not evaluate (numbers and None stay as they are)."""
    if isinstance(v, str) and v.startswith(FORMULA_STARTS):
        return "'" + v
    return v


def safe_row(values) -> list:
    return [safe_cell(v) for v in values]


def safe_dict(row: dict) -> dict:
    return {k: safe_cell(v) for k, v in row.items()}
