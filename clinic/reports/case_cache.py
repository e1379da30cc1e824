"""The district's pregnancies kept between reports, brought up to date from what changed.

A report needs every pregnancy's records and plan. Reading and planning them all takes long
at district size, and between two looks at the report little changes. So ``CaseCache`` keeps,
per partition file of the store, the records it held (keyed by the file's inode, mtime and
size: every write replaces the file, so an unchanged key means unchanged records), and per
pregnancy the plan made for it with the times of ``now`` that plan holds for
(``plan_cache.PlanEntry``), the hash of its records and the planner it was made with.

``load`` reads only partitions whose key changed, re-plans only a pregnancy whose records or
planner changed or whose plan no longer holds at the new ``now``, and hands out the other
``Case`` objects again (with their plan's ``now`` moved on), so what the indicators worked
out for a case in a month (``Case`` keeps it) is not worked out again. The result is the one
a fresh load would give; ``tests/reports/test_case_cache.py`` checks that.
"""
from __future__ import annotations

import copy
import threading
import weakref
from dataclasses import dataclass, field
from datetime import datetime
from typing import Callable

from clinic.reports.coverage import Case, ReportError
from clinic.reports.plan_cache import PlanEntry, content_key, rebased
from clinic.reports.planning import Inputs, may_count, plan_jobs, planners


@dataclass
class _Part:
    key: tuple | None
    women: dict[str, dict] = field(default_factory=dict)
    pregnancies: dict[str, dict] = field(default_factory=dict)
    entries: dict[str, list[dict]] = field(default_factory=dict)    # pregnancy id -> its entries here
    stock: list[dict] = field(default_factory=list)
    facilities: set[str] = field(default_factory=set)


@dataclass
class _Kept:
    content: str              # hash of woman, pregnancy and entries
    planner: str              # Planner.key
    entries: list[dict]       # every entry, voided included, in (created_at, id) order
    entry: PlanEntry
    case: Case


def _part_of(key, records: list[dict]) -> _Part:
    part = _Part(key)
    for r in records:
        kind = r.get("kind")
        if kind == "woman":
            part.women[r["id"]] = r
        elif kind == "pregnancy":
            part.pregnancies[r["id"]] = r
        elif kind == "stock":
            part.stock.append(r)
        elif r.get("pregnancy_id"):
            part.entries.setdefault(r["pregnancy_id"], []).append(r)
        if r.get("facility"):
            part.facilities.add(r["facility"])
    return part


class CaseCache:
    """What one store's last report read and planned (see the module). Thread-safe."""

    def __init__(self):
        self._lock = threading.Lock()
        self.parts: dict[str, _Part] = {}
        self.women: dict[str, dict] = {}
        self.pregnancies: dict[str, dict] = {}
        self.entries: dict[str, dict[str, list[dict]]] = {}   # pregnancy id -> partition -> entries
        self.of_woman: dict[str, set[str]] = {}               # woman id -> pregnancy ids
        self.kept: dict[str, _Kept] = {}
        self.last = {"partitions_read": 0, "planned": 0, "reused": 0}

    # ---- the records ------------------------------------------------------------------------

    def _drop(self, name: str, part: _Part, dirty: set[str]) -> None:
        for wid in part.women:
            self.women.pop(wid, None)
            dirty |= self.of_woman.get(wid, set())
        for pid, p in part.pregnancies.items():
            self.pregnancies.pop(pid, None)
            self.of_woman.get(p.get("woman_id"), set()).discard(pid)
            dirty.add(pid)
        for pid in part.entries:
            self.entries.get(pid, {}).pop(name, None)
            dirty.add(pid)

    def _add(self, name: str, part: _Part, dirty: set[str]) -> None:
        self.women.update(part.women)
        for wid in part.women:
            dirty |= self.of_woman.get(wid, set())
        for pid, p in part.pregnancies.items():
            self.pregnancies[pid] = p
            self.of_woman.setdefault(p.get("woman_id"), set()).add(pid)
            dirty.add(pid)
        for pid, ents in part.entries.items():
            self.entries.setdefault(pid, {})[name] = ents
            dirty.add(pid)

    def _refresh(self, store) -> set[str]:
        """Read the partitions that changed since the last load; the pregnancies they touch."""
        dirty: set[str] = set()
        now_keys = store.partition_keys()
        for name in [n for n in self.parts if n not in now_keys]:
            self._drop(name, self.parts.pop(name), dirty)
        read = 0
        for name, key in now_keys.items():
            old = self.parts.get(name)
            if old is not None and old.key == key:
                continue
            got_key, records = store.partition_records(name)
            read += 1
            if old is not None:
                self._drop(name, old, dirty)
            part = _part_of(got_key, records)
            self.parts[name] = part
            self._add(name, part, dirty)
        self.last["partitions_read"] = read
        return dirty

    def _entries_of(self, pid: str) -> list[dict]:
        ents = [e for part in self.entries.get(pid, {}).values() for e in part]
        ents.sort(key=lambda e: (e.get("created_at") or "", e["id"]))
        return ents

    # ---- the cases ----------------------------------------------------------------------------

    def load(self, store, settings, *, now: datetime, first_month=None, facility_care=None,
             facility_names=None, workers: int | None = None) -> Inputs:
        """The report's inputs: every pregnancy that can count in ``first_month`` or later."""
        cutoff = first_month.first_day if first_month else None

        def counts(woman: dict, preg: dict, ents: list[dict]) -> bool:
            if preg.get("voided") or woman.get("voided"):
                return False
            return cutoff is None or may_count(preg, ents, cutoff)

        with self._lock:
            return self._load(store, settings, now, counts, facility_care, facility_names, workers, None)

    def cases(self, store, settings, *, now: datetime, select: Callable[[dict, dict, list[dict]], bool],
              failed: list) -> Inputs:
        """The cases of the pregnancies ``select(woman, pregnancy, entries)`` keeps, planned as this
        installation plans one pregnancy (``care_inputs.plan_from_settings`` with the store: her
        earlier pregnancies handed on); a pregnancy that cannot be planned (or whose woman is
        missing) goes to ``failed`` as (woman or None, pregnancy, message) instead of stopping the rest."""
        with self._lock:
            return self._load(store, settings, now, select, None, None, 1, failed)

    # ---- what the woman's earlier pregnancies hand on (``cases`` only) --------------------------

    def pregnancies_of_woman(self, woman_id: str) -> list[dict]:
        """As ``Store.pregnancies_of_woman``, from what was read (``care_inputs.earlier_pregnancies``)."""
        out = [self.pregnancies[p] for p in self.of_woman.get(woman_id, ()) if p in self.pregnancies]
        return sorted(out, key=lambda p: (p.get("booked_on", ""), p["created_at"]))

    def history(self, pregnancy_id: str) -> tuple[dict, dict, list[dict]]:
        """As ``Store.history``, from what was read."""
        p = self.pregnancies[pregnancy_id]
        return self.women[p["woman_id"]], p, self._entries_of(pregnancy_id)

    def _earlier_content(self, preg: dict) -> str:
        """A hash of the records of every other pregnancy of the woman (what ``earlier`` may read)."""
        others = sorted(p for p in self.of_woman.get(preg.get("woman_id"), ()) if p != preg["id"])
        if not others:
            return ""
        return content_key({}, {}, [[self.pregnancies.get(p), self._entries_of(p)] for p in others])

    def _plan_with_earlier(self, settings, jobs: list, planner, now: datetime) -> list:
        from clinic.care import plan_pregnancy
        from clinic.care.errors import CareError
        from clinic.care_inputs import earlier_pregnancies
        from clinic.reports.plan_cache import entry_for

        out: list = []
        for woman, preg, ents in jobs:
            def make(n, woman=woman, preg=preg, ents=ents):
                earlier = earlier_pregnancies(settings, self, preg, n)
                return plan_pregnancy(woman, preg, ents, now=n, profile=planner.profile, context=planner.context,
                                      earlier=earlier)
            try:
                out.append(entry_for(now, make, planner.context.tz))
            except CareError as e:
                out.append(str(e))
        return out

    def _load(self, store, settings, now, select, facility_care, facility_names, workers, failed) -> Inputs:
        own, per = planners(settings, facility_care)
        dirty = self._refresh(store)
        with_earlier = failed is not None
        if with_earlier:  # a change to one pregnancy of a woman may change the plans of her later ones
            dirty |= {q for p in dirty if p in self.pregnancies
                      for q in self.of_woman.get(self.pregnancies[p].get("woman_id"), ())}
        out: dict[str, Case] = {}
        jobs, job_meta = [], []
        used: dict[str, str] = {}
        reused = 0
        for pid, preg in self.pregnancies.items():
            woman = self.women.get(preg.get("woman_id"))
            if woman is None:
                msg = (f"pregnancy {pid} (from {preg.get('facility')}) names woman {preg.get('woman_id')}, "
                       f"who is not in the store; import the bundle that holds her")
                if failed is None:
                    raise ReportError(msg)
                failed.append((None, preg, msg))
                continue
            pl = per.get(preg.get("facility"), own)
            kept = self.kept.get(pid)
            if kept is not None and kept.planner != pl.key:
                kept = None
            if pid in dirty or kept is None:
                ents = self._entries_of(pid)
                content = content_key(woman, preg, ents) + (self._earlier_content(preg) if with_earlier else "")
                if kept is not None and kept.content != content:
                    kept = None
            else:
                ents, content = kept.entries, kept.content
            if not select(woman, preg, ents):
                continue
            used[preg.get("facility", "")] = pl.label
            if kept is not None and kept.entry.holds(now):
                case = kept.case
                plan = rebased(kept.entry, now)
                if plan is not case.plan:
                    case = copy.copy(case)   # shares what the indicators worked out; only ``now`` moves
                    case.plan = plan
                kept.entries = ents
                out[pid] = case
                reused += 1
                continue
            jobs.append((woman, preg, ents))
            job_meta.append((pid, content, pl.key))
        if with_earlier:
            entries = self._plan_with_earlier(settings, jobs, own, now)
        else:
            entries = plan_jobs(jobs, own, per, settings, facility_care, now, workers)
        for (woman, preg, ents), (pid, content, pkey), entry in zip(jobs, job_meta, entries, strict=True):
            if not isinstance(entry, PlanEntry):
                failed.append((woman, preg, entry))   # the engine's message, collected (``cases``)
                continue
            case = Case(woman, preg, [e for e in ents if not e.get("voided")], rebased(entry, now))
            self.kept[pid] = _Kept(content, pkey, ents, entry, case)
            out[pid] = case
        for pid in [p for p in self.kept if p not in self.pregnancies]:
            del self.kept[pid]
        self.last.update(planned=len(jobs), reused=reused)
        cases = sorted(out.values(), key=lambda c: (c.facility, c.pregnancy.get("booked_on", ""), c.id))
        stock = [r for part in self.parts.values() for r in part.stock]
        facilities = set().union(*(part.facilities for part in self.parts.values())) if self.parts else set()
        labels = {f: used.get(f, (per.get(f) or own).label) for f in facilities}
        return Inputs(cases, stock, sorted(facilities), dict(facility_names or {}), own.label, labels)


_BY_STORE: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_BY_STORE_LOCK = threading.Lock()


def cache_for(store) -> CaseCache:
    """The cache kept with one Store object (as long as the store lives: the web app's one)."""
    with _BY_STORE_LOCK:
        got = _BY_STORE.get(store)
        if got is None:
            got = _BY_STORE[store] = CaseCache()
        return got
