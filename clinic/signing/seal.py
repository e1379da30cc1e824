"""The facility key's seal on backups: ``BackupSeal(data_dir)`` signs a backup's manifest and
checks a backup's signature, for ``clinic.store`` (which asks for a ``Seal`` and cannot import
this package: they are peers; whoever opens the store hands it one).

Checking goes through the trust list of this installation (``load_trust``), which holds this
facility's own keys, current and retired, beside the district's list: a backup made here with
an older key still verifies, and one of another trusted facility verifies as that facility's.
"""
from __future__ import annotations

from datetime import date
from pathlib import Path

from clinic.signing import cose
from clinic.signing.errors import CoseFormatError
from clinic.signing.keys import KEYS_DIR, PRIVATE_FILE, load_signing_key
from clinic.signing.trust import load_trust


class BackupSeal:
    """Signs with, and checks against, the keys of one data directory."""

    def __init__(self, data_dir: Path):
        self.data_dir = Path(data_dir)

    def has_key(self) -> bool:
        return (self.data_dir / KEYS_DIR / PRIVATE_FILE).exists()

    def sign(self, payload: bytes) -> bytes | None:
        """A COSE_Sign1 over ``payload`` with the facility key; None when there is none here
        (a KeyStoreError when the key is there but cannot be used)."""
        if not self.has_key():
            return None
        return cose.sign1(payload, load_signing_key(self.data_dir))

    def check(self, message: bytes, on_date: date | None) -> tuple[str, str | None, bytes, str]:
        """(state, facility, payload, reason) of a signature, as TrustList.verify judges it."""
        try:
            v = load_trust(self.data_dir).verify(message, on_date=on_date)
        except CoseFormatError as e:
            return "altered", None, b"", f"the signature cannot be read ({e})"
        return v.state, v.facility_id, v.payload, v.reason or v.state
