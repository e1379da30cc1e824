"""The coverage indicators, one module per section of the report (see registry.py).

    from clinic.reports.indicators import INDICATORS, indicator_by_id

Adding one: write a generator in its section's module and decorate it with ``@indicator``;
it then appears on screen and in CSV, JSON, PDF and FHIR.
"""
# Importing the section modules registers their indicators (INDICATORS keeps SECTIONS order,
# whatever order these imports are in).
from clinic.reports.indicators import birth, booking, outcome, prophylaxis  # noqa: F401
from clinic.reports.indicators.registry import INDICATORS, Hit, Indicator, closed_in, indicator, indicator_by_id

__all__ = ["INDICATORS", "Hit", "Indicator", "closed_in", "indicator", "indicator_by_id"]
