"""The store check behind ``rhledger check``: every file parses, index and partitions agree,
records validate and their parents exist, and every stored version has its audit line.

Opening a store already refuses a partition that does not parse (``opening``); the check
reads everything, reports every problem it finds, and changes nothing.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta

from clinic.records.schema import KINDS
from clinic.records.validate import ValidationError, validate_record
from clinic.store.errors import StoreCorrupt
from clinic.store.layout import partition_files
from clinic.store.storage import TABLE
from clinic.store.writer import Writer


@dataclass
class CheckReport:
    """What ``Store.check`` found: counts and problems (empty when all is well)."""

    counts: dict[str, dict[str, int]] = field(default_factory=dict)  # facility -> kind -> n
    partitions: int = 0
    audit_lines: int = 0
    problems: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems


def _unparsed(e: StoreCorrupt) -> str:
    """A StoreCorrupt message without its how-to-restore part (the report says it once)."""
    return str(e).split(". The file")[0]


class Checking(Writer):
    """The full check of the store's files (part of ``Store``)."""

    def check(self, now: datetime | None = None) -> CheckReport:
        """Verify every partition parses, the index matches, records validate, parents exist,
        the audit log reads and holds a line for every stored record's version.

        Changes nothing, except that taking the lock settles an interrupted write first (see
        ``journal``); what that did is among the notes."""
        now = self._now(now) + timedelta(days=1)  # entries made today in a later zone are fine
        rep = CheckReport()
        with self._locked():
            self._refresh()
            seen = self._read_partitions(rep)
            self._check_index(rep, seen)
            self._check_records(rep, seen, now)
            self._check_audit(rep, seen)
            rep.notes += self.recovered
        return rep

    def _read_partitions(self, rep: CheckReport) -> dict[str, tuple[str, dict]]:
        """record id -> (partition, record), every partition file parsed."""
        seen: dict[str, tuple[str, dict]] = {}
        for path in partition_files(self.records_dir):
            rep.partitions += 1
            try:
                data = self._pcache.load(path) or {}
            except StoreCorrupt as e:
                rep.problems.append(_unparsed(e))
                continue
            part = path.relative_to(self.records_dir).with_suffix("").as_posix()
            for doc in data.get(TABLE, {}).values():
                rid = doc.get("id")
                if rid in seen:
                    rep.problems.append(f"record {rid} is stored twice ({seen[rid][0]} and {part})")
                seen[rid] = (part, doc)
        return seen

    def _check_index(self, rep: CheckReport, seen: dict[str, tuple[str, dict]]) -> None:
        for rid, (partition, *_rest) in self._index.locs.items():
            if rid not in seen:
                rep.notes.append(f"index line for {rid} points at {partition}, which does not hold it "
                                 f"(an interrupted write; harmless)")
            elif seen[rid][0] != partition:
                rep.problems.append(f"record {rid} is in {seen[rid][0]} but the index says {partition} "
                                    f"(run `rhledger check --repair` to rebuild it)")

    def _check_records(self, rep: CheckReport, seen: dict[str, tuple[str, dict]], now: datetime) -> None:
        for rid, (part, rec) in seen.items():
            if rid not in self._index.locs:
                rep.problems.append(f"record {rid} in {part} is missing from the index "
                                    f"(run `rhledger check --repair` to rebuild it)")
            kind = rec.get("kind")
            fac = rec.get("facility", "?")
            rep.counts.setdefault(fac, {}).setdefault(kind, 0)
            rep.counts[fac][kind] += 1
            if kind not in KINDS:
                rep.problems.append(f"record {rid} in {part} has unknown kind {kind!r}")
                continue
            spec = KINDS[kind]
            try:
                validate_record(kind, {k: v for k, v in rec.items() if k in spec.field_names},
                                now=now, tz=self.tz)
            except ValidationError as e:
                rep.problems.append(f"record {rid} ({kind}, {part}) does not validate: {e}")
            for key, want in (("woman_id", "woman"), ("pregnancy_id", "pregnancy")):
                needed = (spec.parent in ("woman", "pregnancy")) if want == "woman" else spec.parent == "pregnancy"
                if not needed:
                    continue
                ref = rec.get(key)
                if ref not in seen or seen[ref][1].get("kind") != want:
                    origin = " (imported)" if rec.get("origin") else ""
                    rep.problems.append(f"record {rid} ({kind}){origin}: its {want} {ref} does not exist")

    def _check_audit(self, rep: CheckReport, seen: dict[str, tuple[str, dict]]) -> None:
        audited: set[tuple[str, int]] = set()
        for path in self._audit.files():
            try:
                for entry in self._audit.read(path):
                    rep.audit_lines += 1
                    if entry.get("action") != "import-declined":  # a copy not taken in stores nothing
                        audited.add((entry.get("id"), entry.get("version")))
            except StoreCorrupt as e:
                rep.problems.append(_unparsed(e))
        for rid, (part, rec) in seen.items():
            if (rid, rec.get("version")) not in audited:
                rep.problems.append(f"record {rid} ({rec.get('kind')}, {part}) version {rec.get('version')} "
                                    f"has no audit line")
