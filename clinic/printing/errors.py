"""The error of printing, importable without WeasyPrint (the command line lists it early)."""
from __future__ import annotations


class PrintError(RuntimeError):
    """A printable could not be made exactly as designed; the message says what and why."""
