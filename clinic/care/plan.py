"""plan_pregnancy: one pregnancy's history + now + profile -> what is due, overdue, missed, wrong.

The engine reads stored record dicts (schema.py), skips voided ones, keeps ones dated after
``now`` (counted, with a clock warning), sorts them by (time, id) so the order given never
matters, and derives every item from the profile. Nothing here stores anything.

This module runs the rule sections in order; each lives in ``clinic.care.planning``:
``core`` (history and planner state), ``rhd``, ``antibodies``, ``identification``, ``doses``,
``antenatal``, ``events``, ``fmh``, ``birth``, ``clinic.care.surveillance``, ``decisions``
(tasks whose choice is gone close as no longer needed) and ``carried`` (missed doses and what
earlier pregnancies hand on).
"""
from __future__ import annotations

from collections.abc import Iterable
from datetime import datetime, timezone
from typing import Any

from clinic.care.dating import Dating, choose_dating, profile_thresholds
from clinic.care.errors import CareInputError
from clinic.care.model import Alert, CareContext, EarlierPregnancy, Plan
from clinic.care.planning import antenatal, birth, carried, decisions, doses, events, fmh, identification, rhd
from clinic.care.planning.antibodies import judge_antibodies
from clinic.care.planning.core import History, Planner
from clinic.care.protocol import Profile
from clinic.care.surveillance import surveillance_items
from clinic.records.values import format_ga


def plan_pregnancy(woman: dict, pregnancy: dict, entries: Iterable[Any], *, now: datetime, profile: Profile,
                   context: CareContext | None = None, earlier: Iterable[EarlierPregnancy] | None = None) -> Plan:
    """The plan for one pregnancy as of ``now`` (an aware datetime).

    ``earlier``: the woman's earlier pregnancies, each summarised by
    ``clinic.care.planning.carried.summarise_earlier`` from its own plan; a missed dose or an
    antibody found in one raises an alert in this plan."""
    if not isinstance(now, datetime) or now.tzinfo is None:
        raise CareInputError("now", "must be a timezone-aware date-time")
    if not isinstance(profile, Profile):
        raise CareInputError("profile", "must be a Profile from load_profile()")
    ctx = context or CareContext()
    now = now.astimezone(timezone.utc)
    pl = _start(woman or {}, pregnancy or {}, entries or [], now, profile, ctx)
    pl.earlier = carried.check_earlier(earlier)
    return _run(pl)


def _dating(pr: dict, p: Profile) -> Dating:
    try:
        return choose_dating(
            lmp=pr.get("lmp"), scan_on=pr.get("scan_on"), scan_crl_mm=pr.get("scan_crl_mm"),
            scan_ga_days=pr.get("scan_ga_days"), agreed_edd=pr.get("edd"), rule=p.get("dating.rule"),
            thresholds=profile_thresholds(p), source=p.section_source("dating"))
    except CareInputError as e:
        raise CareInputError(f"pregnancy.{e.field}", e.errors[e.field]) from None


def _start(woman: dict, pregnancy: dict, entries: Iterable[Any], now: datetime, p: Profile,
           ctx: CareContext) -> Planner:
    """The facts every section reads, drawn once (their alerts come first, in this order)."""
    h = History(entries, now, ctx.tz)
    dating = _dating(pregnancy, p)
    alerts: list[Alert] = h.clock_alerts()
    status = rhd.rhd_status(h.of("typing"), p, alerts)
    counted = doses.read_doses(h, ctx.tz, alerts, p)
    ab = judge_antibodies(h, counted, p, alerts)
    fetal = antenatal.fetal_facts(h, p, ctx, alerts)
    return Planner(woman, pregnancy, now, p, ctx, h, dating, status, counted, ab, fetal.summary,
                   fetal.partner_negative, fetal.partner_id, alerts)


def _run(pl: Planner) -> Plan:
    carried.earlier_alerts(pl)
    doses.assign_doses(pl)
    antenatal.booking(pl)
    identification.antibody_items(pl)
    antenatal.partner_typing(pl)
    antenatal.fetal_rhd_test(pl)
    if pl.prophylaxis:
        antenatal.routine_doses(pl)
        events.sensitising_events(pl)
        birth.birth_items(pl)
        fmh.large_fmh_doses(pl)
    else:
        rhd.not_needed_items(pl)
    if pl.ab.surveillance:
        surveillance_items(pl)
    doses.dose_alerts(pl)
    decisions.close_spent(pl)
    carried.missed_doses(pl)
    for it in pl.items:
        if it.state == "not-needed":
            it.dose_iu = None
    pathway = rhd.pathway(pl)
    d = pl.dating
    ga_now = d.ga_days(pl.now, pl.tz)
    dating = {"edd": d.edd, "method": d.method, "reason": d.reason, "source": d.source, "ga_days": ga_now,
              "ga": format_ga(ga_now), "lmp_edd": d.lmp_edd, "scan_edd": d.scan_edd,
              "difference_days": d.difference_days}
    return Plan(pl.p.id, pl.p.version, pl.now, dating, dict(pl.rhd), pathway, pl.fetal["probability"], pl.fetal,
                pl.items, pl.alerts, pl.p.caution, pl.ab.findings, pl.missed, list(pl.earlier))
