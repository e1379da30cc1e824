"""What a plan is made of: Product and CareContext (facility facts), PlanItem, Alert, MissedDose,
EarlierPregnancy (what an earlier pregnancy hands on to the next), Plan."""
from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date, datetime, timezone, tzinfo
from typing import Any

from clinic.care.codes import CATEGORIES, PATHWAYS, SEVERITIES, STATES
from clinic.records.schema import IU_PER_UG
from clinic.records.values import utc_text

__all__ = ["CATEGORIES", "PATHWAYS", "SEVERITIES", "STATES", "Alert", "CareContext", "EarlierPregnancy", "MissedDose",
           "Plan", "PlanItem"]


@dataclass(frozen=True)
class Product:
    """An anti-D product the facility stocks (``[[stock.products]]`` of the settings)."""

    name: str
    vial_iu: int
    routes: tuple[str, ...] = ("IM",)

    @property
    def vial_ug(self) -> float:
        return self.vial_iu / IU_PER_UG


@dataclass(frozen=True)
class CareContext:
    """Facility facts the rules need: population RhD-negative frequency, default maternal
    blood volume, stocked products, and the facility time zone (for days and GA).
    An installation's is built from its settings by ``clinic.care_inputs``."""

    rhd_negative_frequency: float = 0.15
    maternal_blood_volume_ml: float = 5000.0
    products: tuple[Product, ...] = ()
    tz: tzinfo = timezone.utc


def _dt(v):
    if isinstance(v, datetime):
        return utc_text(v)
    if isinstance(v, date):
        return v.isoformat()
    return v


@dataclass
class PlanItem:
    code: str
    category: str
    title: str
    state: str
    reason: str
    source: str
    due: datetime | None = None
    opens: datetime | None = None
    closes: datetime | None = None
    late_until: datetime | None = None
    dose_iu: int | None = None
    related_id: str | None = None
    done_record_id: str | None = None
    done_at: datetime | None = None
    timeliness: str | None = None

    @property
    def dose_ug(self) -> float | None:
        return None if self.dose_iu is None else self.dose_iu / IU_PER_UG

    def to_dict(self) -> dict[str, Any]:
        return {
            "code": self.code, "category": self.category, "title": self.title, "state": self.state,
            "due": _dt(self.due), "opens": _dt(self.opens), "closes": _dt(self.closes),
            "late_until": _dt(self.late_until), "dose_iu": self.dose_iu, "dose_ug": self.dose_ug,
            "reason": self.reason, "source": self.source, "related_id": self.related_id,
            "done_record_id": self.done_record_id, "done_at": _dt(self.done_at), "timeliness": self.timeliness,
        }


@dataclass
class Alert:
    code: str
    severity: str
    message: str
    source: str
    record_ids: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "severity": self.severity, "message": self.message, "source": self.source,
                "record_ids": list(self.record_ids)}


@dataclass
class MissedDose:
    """An anti-D dose after a birth or an event that was not given by the end of its late
    window, and what follows from it (a follow-up antibody screen, and the next booking)."""

    code: str                    # the plan item: postpartum-dose, event-dose:<event id>
    title: str
    related_id: str | None       # the birth or event record
    occurred_at: datetime        # the birth or the event
    missed_at: datetime          # when the late window closed
    screen_from: date            # local date from which the follow-up antibody screen is due
    follow_up: str               # what follows, in words
    source: str
    screen_id: str | None = None  # the follow-up screen, once taken

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "title": self.title, "related_id": self.related_id,
                "occurred_at": _dt(self.occurred_at), "missed_at": _dt(self.missed_at),
                "screen_from": _dt(self.screen_from), "follow_up": self.follow_up, "source": self.source,
                "screen_id": self.screen_id}


@dataclass(frozen=True)
class EarlierPregnancy:
    """What an earlier pregnancy of the same woman hands on to a later one: ``plan_pregnancy``'s
    ``earlier=`` input, made by ``clinic.care.planning.carried.summarise_earlier``."""

    pregnancy_id: str
    booked_on: str | None = None
    ended_on: str | None = None             # local date of the birth, when one is recorded
    missed: tuple[str, ...] = ()            # each missed dose, in words
    antibodies: tuple[str, ...] = ()        # antibodies found (not passive anti-D), in words
    problem: str | None = None              # its plan could not be worked out: why

    def to_dict(self) -> dict[str, Any]:
        return {"pregnancy_id": self.pregnancy_id, "booked_on": self.booked_on, "ended_on": self.ended_on,
                "missed": list(self.missed), "antibodies": list(self.antibodies), "problem": self.problem}


@dataclass
class Plan:
    profile_id: str
    profile_version: str
    now: datetime
    dating: dict[str, Any]
    rhd: dict[str, Any]
    pathway: str
    fetal_rhd_probability: float | None
    fetal_rhd: dict[str, Any]
    items: list[PlanItem]
    alerts: list[Alert]
    caution: str
    antibodies: list[dict[str, Any]] = field(default_factory=list)
    missed_doses: list[MissedDose] = field(default_factory=list)
    earlier: list[EarlierPregnancy] = field(default_factory=list)

    def item(self, code: str) -> PlanItem | None:
        for it in self.items:
            if it.code == code:
                return it
        return None

    def alerts_with(self, code: str) -> list[Alert]:
        return [a for a in self.alerts if a.code == code]

    def to_dict(self) -> dict[str, Any]:
        return {
            "profile_id": self.profile_id, "profile_version": self.profile_version, "now": _dt(self.now),
            "dating": {k: _dt(v) for k, v in self.dating.items()}, "rhd": dict(self.rhd),
            "pathway": self.pathway, "fetal_rhd_probability": self.fetal_rhd_probability,
            "fetal_rhd": dict(self.fetal_rhd), "antibodies": [dict(a) for a in self.antibodies],
            "items": [i.to_dict() for i in self.items], "alerts": [a.to_dict() for a in self.alerts],
            "caution": self.caution, "missed_doses": [m.to_dict() for m in self.missed_doses],
            "earlier": [e.to_dict() for e in self.earlier],
        }
