"""Valid example fields per kind (invented), for the validation tests to spoil one value at a time."""
from __future__ import annotations

from datetime import datetime, timezone
from zoneinfo import ZoneInfo

NOW = datetime(2026, 3, 16, 9, 30, tzinfo=timezone.utc)
TZ = ZoneInfo("Africa/Nairobi")

VALID = {
    "typing": {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02"},
    "screen": {"sampled_at": "2026-03-10T10:00", "ga_days": "28+0", "result": "positive",
               "antibodies": ["anti-D"], "titre": 16, "titre_antibody": "anti-D"},
    "fbs": {"sampled_at": "2026-03-10T10:00", "ga_days": "26+3", "hct_pct": 30},
    "dose": {"given_at": "2026-03-10T10:00", "amount": 1500, "unit": "IU", "route": "IM", "lot": "LOT-77",
             "lot_expiry": "2027-05-31", "indication": "routine-antenatal", "given_by": "Midwife One"},
    "event": {"event_kind": "abdominal-trauma", "occurred_at": "2026-03-14T18:00", "ga_days": "30+2"},
}


def valid(kind: str, **changes) -> dict:
    out = dict(VALID[kind])
    for k, v in changes.items():
        if v is None:
            out.pop(k, None)
        else:
            out[k] = v
    return out
