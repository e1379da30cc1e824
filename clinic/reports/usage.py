"""Anti-D used in the month: doses and IU per facility (and the district), by indication and by lot."""
from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from datetime import tzinfo

from clinic.records.schema import IU_PER_UG
from clinic.records.values import parse_utc
from clinic.reports.month import Month


@dataclass
class UsageRow:
    facility: str
    by: str           # "indication" or "lot"
    key: str
    doses: int
    iu: int

    @property
    def ug(self) -> float:
        return self.iu / IU_PER_UG


@dataclass
class UsageTally:
    """Adds up the doses given in ``month`` for each facility named (its own and the district)."""

    month: Month
    tz: tzinfo
    _counts: dict[tuple[str, str, str], list[int]] = field(default_factory=lambda: defaultdict(lambda: [0, 0]))

    def add(self, doses: list[dict], facilities: tuple[str, ...]) -> None:
        for d in doses:
            if self.month.contains(parse_utc(d["given_at"]), self.tz):
                for f in facilities:
                    for by, key in (("indication", d.get("indication", "")), ("lot", d.get("lot", ""))):
                        u = self._counts[(f, by, key)]
                        u[0] += 1
                        u[1] += int(d.get("dose_iu") or 0)

    def rows(self) -> list[UsageRow]:
        return [UsageRow(f, by, key, n, iu) for (f, by, key), (n, iu) in sorted(self._counts.items())]
