"""District reporting: clinic bundles (export/import), monthly coverage, CSV/JSON/PDF/FHIR outputs.

- ``bundle``: the signed, compressed, incremental bundle format (docs/bundle-format.md)
- ``cases``: records from the store, planned by the care engine, as ``Case`` objects
- ``coverage``: the indicators (pure: records + plans in, numbers and lists out)
- ``stock``: the anti-D stock ledger's balances
- ``render_csv``, ``render_json``, ``render_fhir``, ``render_pdf``, ``charts``: the formats
- ``outputs``: one entry point for the command line and the web pages

Nothing here imports Flask. Every eligibility and timing decision is the care engine's.
"""
