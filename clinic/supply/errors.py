"""The one error of the supply forecast: an input out of range, naming the field."""
from __future__ import annotations


class SupplyInputError(ValueError):
    """A forecast input is out of range; ``.errors`` maps the field to the allowed range."""

    def __init__(self, field: str, message: str):
        super().__init__(f"{field}: {message}")
        self.field = field
        self.errors = {field: message}
