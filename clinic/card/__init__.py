"""The patient-held card: a signed QR record of the RhD history, printed, read and imported.

- ``payload``: the content as compact CBOR (version 1), ``qrtext``: prefix + Base45 + DEFLATE,
  ``codec``: sign and pack (``make_card_text``), read and check (``read_card``)
- ``view``: what a person reads on the card; ``printing``: card, sheet and referral note as PDF/PNG
  (rendered by ``clinic.printing``, offline)
- ``issue``: issue numbers (``<data>/cards/issued.jsonl``) and a card from the store
- ``importing``: taking a card's history into the store; ``scan``: QR codes in photos

The format is described in docs/card-format.md.
"""
