"""Anti-D supply planning: how many vials each facility will need, when its stock runs out,
which lots expire unused, and which lots could move between clinics.

Pure (no Flask, no TinyDB, no store): plans and stock lots in, figures out.

- ``poisson``: the Poisson quantile (the upper figure), pure Python
- ``forecast``: expected doses per day from the care engine's plan items and the event rate
- ``stock_plan``: first-expiry-first use of the lots, stock-out date, expiring lots, order
- ``transfers``: greedy matching of lots expiring unused to shortfalls at other clinics
- ``report``: one facility's or a district's report; ``render``: JSON and CSV

``clinic.reports.supply`` reads the store and the bundles and calls ``report.build_report``.
The method in words and the JSON shape: docs/supply-forecast.md.
"""
