"""Fetomaternal haemorrhage: whether the FMH test after an event or the birth was done, and
more anti-D when the test shows a bleed larger than the standard dose covers."""
from __future__ import annotations

from datetime import datetime, timedelta

from clinic.care import calc, codes
from clinic.care.codes import AlertCode, ItemCode
from clinic.care.errors import CareInputError
from clinic.care.model import PlanItem
from clinic.care.planning.core import OPEN_STATES, Planner, Record, window_state
from clinic.care.planning.doses import POSTPARTUM, event_key
from clinic.records.values import parse_utc

# Methods that count fetal cells; a rosette screen only says whether to count.
QUANTITATIVE = ("kleihauer-betke", "flow-cytometry")


def fmh_test_done(pl: Planner, it: PlanItem, tests: list[Record], closes: datetime, late_until: datetime,
                  start: datetime) -> None:
    """The FMH test item is done by a quantitative test or a negative rosette screen."""
    quant = [f for f in tests if f["method"] in QUANTITATIVE or f.get("rosette_result") == "negative"]
    if quant:
        f = quant[0]
        done_at = parse_utc(f["sampled_at"])
        it.state, it.done_record_id, it.done_at = "done", f["id"], done_at
        it.timeliness = "on-time" if done_at <= closes else "late"
        it.reason = "FMH test recorded"
        return
    it.state = window_state(pl.now, start, closes, late_until)
    if it.state == "overdue":
        it.reason = "no FMH test yet and the deadline has passed: take the sample now"
    elif it.state == "missed":
        it.reason = "no FMH test was recorded"
    if any(f.get("rosette_result") == "positive" for f in tests):
        it.reason = "rosette screen positive: quantify the bleed by Kleihauer-Betke or flow cytometry now"
        pl.alert(AlertCode.FMH_ROSETTE_POSITIVE, "warning", it.reason, it.source, [f["id"] for f in tests])


def large_fmh_doses(pl: Planner) -> None:
    """More anti-D when a quantitative FMH test asks for more than the event's or the birth's dose."""
    p = pl.p
    events = {e["id"]: e for e in pl.h.of("event")}
    birth_ids = {b["id"] for b in pl.births}
    if pl.stop_reason():
        return  # sensitised: more anti-D no longer helps
    for f in pl.h.of("fmh"):
        if f["method"] not in QUANTITATIVE:
            continue
        target = f.get("covers_id")
        ft = parse_utc(f["sampled_at"])
        if target is None:
            if pl.born_at and pl.birth and ft >= pl.born_at:
                target = pl.birth["id"]
            else:
                window = timedelta(days=p.get("events.late_window_days"))
                c = [e for e in events.values() if pl.h.time[e["id"]] <= ft <= pl.h.time[e["id"]] + window]
                target = c[-1]["id"] if c else None
        if target is None or (target not in events and target not in birth_ids):
            continue
        mbv = f.get("maternal_volume_ml") or pl.ctx.maternal_blood_volume_ml
        counted = "fetal_cell_percent" not in f
        try:
            res = calc.fmh_result(profile=p, fetal_cells=f.get("fetal_cells") if counted else None,
                                  cells_counted=f.get("cells_counted") if counted else None,
                                  fetal_cell_percent=f.get("fetal_cell_percent"), maternal_volume_ml=mbv,
                                  vial_sizes_iu=[x.vial_iu for x in pl.ctx.products])
        except CareInputError as err:
            pl.alert(AlertCode.FMH_UNREADABLE, "warning", f"FMH test {f['id']} cannot be used: {err}",
                     p.section_source("fmh"), [f["id"]])
            continue
        is_birth = target in birth_ids
        key = POSTPARTUM if is_birth else event_key(target)
        base_item = pl.item(ItemCode.POSTPARTUM_DOSE if is_birth else codes.event_dose_code(target))
        if base_item is None or base_item.state == "not-needed":
            continue
        std = base_item.dose_iu or 0
        total = res["dose_iu"]
        if total <= std:
            continue
        code = ItemCode.POSTPARTUM_FMH_DOSE if is_birth else codes.event_fmh_dose_code(target)
        if pl.item(code):
            continue
        t0 = pl.born_at if is_birth and pl.born_at else pl.h.time[target]
        sec = "postpartum" if is_birth else "events"
        closes = t0 + timedelta(hours=p.get(f"{sec}.deadline_hours"))
        late = t0 + timedelta(days=p.get(f"{sec}.late_window_days"))
        closes, late = max(closes, ft), max(late, ft)
        # The published rule gives the TOTAL for this bleed, the standard dose included (AABB vial
        # rule / ACOG PB 181; BSH 2014: 500 IU covers 4 mL fetal red cells). What is still asked
        # is that total less what was given for the bleed and less the standard dose still
        # planned. Where bleeding continues, later doses after the late window are the repeats.
        repeats = None if is_birth else pl.item(codes.event_repeat_code(target))
        given_doses = [d for i, d in enumerate(pl.assigned.get(key, []))
                       if i == 0 or repeats is None or d.at <= late]
        given = sum(d.iu for d in given_doses)
        planned = std if base_item.state in OPEN_STATES else 0
        more = max(total - given - planned, 0)
        pl.fmh_need[key] = max(pl.fmh_need.get(key, 0), total)
        parts = [f"{given} IU given so far"] + ([f"the standard {planned} IU still to give"] if planned else [])
        it = pl.add(code, "Further anti-D for a large fetomaternal haemorrhage", "due",
                    (f"FMH {res['fetal_red_cells_ml']:g} mL fetal red cells ({res['working']}): {total} IU needed in "
                     f"all for this bleed, the standard dose included; {' and '.join(parts)}: "
                     + (f"{more} IU more" if more else "nothing more")), res["source"],
                    due=ft, opens=ft, closes=closes, late_until=late, dose_iu=more or total, related_id=target)
        if more == 0 and given_doses:
            pl.mark_done(it, given_doses[-1], closes)
            it.dose_iu = total
        else:
            it.state = window_state(pl.now, ft, closes, late)
            for w in res["warnings"]:
                pl.alert(AlertCode.FMH_LARGE_IM, "warning", w, res["source"], [f["id"]])
            pl.alert(AlertCode.FMH_LARGE, "danger",
                     f"large fetomaternal haemorrhage: {total} IU needed in all for this bleed; {more} IU more than "
                     f"{' and '.join(parts)}; repeat the FMH test after giving it (48 h IM / 24-48 h IV per local "
                     f"protocol)", res["source"], [f["id"]])
