"""Protocol profiles: reviewed TOML data files in ``clinic/care/profiles``.

A profile holds every protocol value the engine uses (doses, windows, deadlines,
thresholds), each with its source beside it in the file. A variant profile names its
parent with ``extends`` and gives only what differs (tables merge, lists replace). A
facility overrides single values with dotted keys (``"routine.regimen" = "single"``,
``"events.bands.0.dose_iu" = 250``); an unknown key or a value of the wrong type or range
is a ``ProfileError`` naming it.
"""
from __future__ import annotations

import copy
import tomllib
from dataclasses import dataclass
from importlib import resources
from typing import Any, Mapping

from clinic.care.codes import ITEMS
from clinic.care.errors import ProfileError
from clinic.records.schema import EVENT_KINDS, GA_MAX_DAYS
from clinic.records.values import GAFormatError, format_ga, parse_ga

PROFILE_DIR = "profiles"

# Every key a profile must hold, with its type. "ga" is weeks+days text; "kinds" is a list of
# event kinds (or ["*"] for all). Lists of tables are described by their element's keys.
_BAND = {"from_ga": "ga", "to_ga": "ga", "dose_iu": "dose", "reduced_dose_iu": "dose0",
         "reduced_dose_if_stocked": "bool", "kinds": "kinds", "conditional_kinds": "kinds",
         "not_needed_kinds": "kinds", "fmh_test_kinds": "kinds", "source": "str"}
_DOSE = {"dose_iu": "dose", "opens_ga": "ga", "closes_ga": "ga", "late_until_ga": "ga"}
_THRESH = {"below_ga": "ga", "days": "days"}
SPEC: dict[str, Any] = {
    "id": "str", "title": "str", "version": "str", "source": "str", "caution": "str",
    "rhd.source": "str", "rhd.weak_d_types_managed_positive": "strs",
    "dating.source": "str", "dating.rule": ("acog-co700", "scan-preferred", "lmp-preferred"),
    "dating.redate_thresholds": [_THRESH],
    "booking.source": "str", "booking.typing_within_days": "days", "booking.screen_within_days": "days",
    "pre_dose_screen.source": "str", "pre_dose_screen.required": "bool", "pre_dose_screen.opens_ga": "ga",
    "routine.source": "str", "routine.regimen": "str", "routine.targeted_prophylaxis": "bool",
    "routine.partner_negative_may_decline": "bool", "routine.partner_negative_skips_routine": "bool",
    "routine.targeted_shared_decision": "bool",
    "partner_typing.source": "str", "partner_typing.offered": "bool", "partner_typing.closes_ga": "ga",
    "fetal_rhd.source": "str", "fetal_rhd.opens_ga": "ga", "fetal_rhd.closes_ga": "ga",
    "fetal_rhd.late_until_ga": "ga",
    "events.source": "str", "events.deadline_hours": "hours", "events.late_window_days": "days",
    "events.after_routine_dose_needs_own_dose": "bool", "events.repeat_for_ongoing_bleeding": "bool",
    "events.repeat_from_ga": "ga", "events.repeat_every_days": "days", "events.repeat_dose_iu": "dose",
    "events.fmh_test_from_ga": "ga", "events.forgone_shared_decision": "bool", "events.bands": [_BAND],
    "postpartum.source": "str", "postpartum.dose_iu": "dose", "postpartum.deadline_hours": "hours",
    "postpartum.late_window_days": "days", "postpartum.fmh_test_required": "bool",
    "fmh.source": "str", "fmh.rule": ("vials-per-30ml", "iu-per-ml"),
    "fmh.whole_blood_ml_per_vial": "num0", "fmh.vial_dose_iu": "dose0", "fmh.fetal_hct": "fraction",
    "fmh.kb_correction_factor": "pos", "fmh.iu_per_ml_red_cells_im": "num0",
    "fmh.iu_per_ml_red_cells_iv": "num0", "fmh.min_dose_iu": "dose", "fmh.default_vial_iu": "dose",
    "fmh.max_im_iu_at_once": "dose",
    "antibody.source": "str", "antibody.passive_window_days": "days", "antibody.passive_max_titre": "titre",
    "antibody.passive_max_iu_ml": "pos", "antibody.clinically_significant": "strs",
    "antibody.not_clinically_significant": "strs", "antibody.identify_within_days": "days",
    "surveillance.source": "str", "surveillance.critical_titre": "titres", "surveillance.use_quantitation": "bool",
    "surveillance.quantitation": "quant", "surveillance.significant_rise_dilutions": "days",
    "surveillance.titre_interval_days_early": "days", "surveillance.interval_change_ga": "ga",
    "surveillance.titre_interval_days_late": "days", "surveillance.doppler_from_ga": "ga",
    "surveillance.doppler_interval_days": "days", "surveillance.mca_mom_mild": "pos",
    "surveillance.mca_mom_moderate": "pos", "surveillance.mca_mom_severe": "pos",
    "surveillance.mca_refer_mom": "pos", "surveillance.hb_mom_mild": "pos",
    "surveillance.hb_mom_moderate": "pos", "surveillance.hb_mom_severe": "pos",
    "surveillance.delivery_text": "str",
    "decisions.source": "str",
    "missed_dose.source": "str", "missed_dose.follow_up_screen_after_days": "days",
}
# The decisions table names every plan item (codes.ITEMS): the items whose choice it informs
# (``serves``), whether it exists only for that choice (``only``) and that choice in words.
for _base in ITEMS:
    SPEC[f"decisions.{_base}.serves"] = "items"
    SPEC[f"decisions.{_base}.only"] = "bool"
    SPEC[f"decisions.{_base}.decision"] = "str"


@dataclass(frozen=True)
class EventBand:
    from_ga_days: int
    to_ga_days: int
    dose_iu: int
    reduced_dose_iu: int
    reduced_dose_if_stocked: bool
    kinds: tuple[str, ...]
    conditional_kinds: tuple[str, ...]
    not_needed_kinds: tuple[str, ...]
    fmh_test_kinds: tuple[str, ...]
    source: str

    def covers(self, kind_list: tuple[str, ...], kind: str) -> bool:
        return "*" in kind_list or kind in kind_list


@dataclass(frozen=True)
class RoutineDose:
    number: int
    dose_iu: int
    opens_ga_days: int
    closes_ga_days: int
    late_until_ga_days: int


class Profile:
    """A loaded, checked protocol profile. ``get("events.deadline_hours")`` reads a value."""

    def __init__(self, data: dict[str, Any], overrides: Mapping[str, Any]):
        self.data = data
        self.overrides = dict(overrides)
        self.id: str = data["id"]
        self.title: str = data["title"]
        self.version: str = data["version"]
        self.source: str = data["source"]
        self.caution: str = data["caution"]

    def get(self, dotted: str) -> Any:
        node: Any = self.data
        for part in dotted.split("."):
            if isinstance(node, list):
                node = node[int(part)]
            else:
                node = node[part]
        return node

    def ga(self, dotted: str) -> int:
        return parse_ga(self.get(dotted))

    def section_source(self, section: str) -> str:
        return f"{self.get(section + '.source')} [profile {self.id} {self.version}]"

    @property
    def regimen(self) -> str:
        return self.get("routine.regimen")

    def routine_doses(self) -> list[RoutineDose]:
        reg = self.data["routine"]["regimens"][self.regimen]
        return [RoutineDose(i + 1, int(d["dose_iu"]), parse_ga(d["opens_ga"]), parse_ga(d["closes_ga"]),
                            parse_ga(d["late_until_ga"])) for i, d in enumerate(reg["doses"])]

    def event_bands(self) -> list[EventBand]:
        out = []
        for b in self.data["events"]["bands"]:
            out.append(EventBand(parse_ga(b["from_ga"]), parse_ga(b["to_ga"]), int(b["dose_iu"]),
                                 int(b["reduced_dose_iu"]), bool(b["reduced_dose_if_stocked"]),
                                 tuple(b["kinds"]), tuple(b["conditional_kinds"]), tuple(b["not_needed_kinds"]),
                                 tuple(b["fmh_test_kinds"]), b["source"]))
        return out

    def band_for(self, ga_days: int) -> EventBand:
        for b in self.event_bands():
            if b.from_ga_days <= ga_days <= b.to_ga_days:
                return b
        raise ProfileError(f"profile {self.id}: no events.bands entry covers GA {format_ga(ga_days)}")

    def describe(self) -> dict[str, str]:
        return {"id": self.id, "title": self.title, "version": self.version, "source": self.source}

    def __repr__(self) -> str:
        return f"<Profile {self.id} {self.version}>"


# ---- loading ---------------------------------------------------------------------------

def _profile_files() -> dict[str, Any]:
    base = resources.files("clinic.care").joinpath(PROFILE_DIR)
    return {p.name[:-5]: p for p in base.iterdir() if p.name.endswith(".toml") and not p.name.startswith("_")}


def _read(profile_id: str, seen: tuple[str, ...] = ()) -> dict[str, Any]:
    files = _profile_files()
    if profile_id not in files:
        raise ProfileError(f"profile {profile_id!r} is not known; available: {', '.join(sorted(files))}")
    if profile_id in seen:
        raise ProfileError(f"profile {profile_id!r} extends itself through {' -> '.join(seen)}")
    try:
        doc = tomllib.loads(files[profile_id].read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as e:
        raise ProfileError(f"profile file {profile_id}.toml is not valid TOML: {e}") from None
    parent = doc.pop("extends", None)
    if parent:
        base = _read(parent, seen + (profile_id,))
        return _merge(base, doc)
    return doc


def _merge(base: dict, top: dict) -> dict:
    out = copy.deepcopy(base)
    for k, v in top.items():
        if isinstance(v, dict) and isinstance(out.get(k), dict):
            out[k] = _merge(out[k], v)
        else:
            out[k] = copy.deepcopy(v)
    return out


def _apply_override(data: dict, key: str, value: Any, profile_id: str) -> None:
    parts = key.split(".")
    node: Any = data
    for i, part in enumerate(parts):
        last = i == len(parts) - 1
        where = ".".join(parts[: i + 1])
        if isinstance(node, list):
            if not part.isdigit() or int(part) >= len(node):
                raise ProfileError(f"override {key!r}: {where!r} is not an index of a list of {len(node)} "
                                   f"(allowed 0 to {len(node) - 1}) in profile {profile_id}")
            idx = int(part)
            if last:
                node[idx] = _typed_like(node[idx], value, key)
            else:
                node = node[idx]
        elif isinstance(node, dict):
            if part not in node:
                raise ProfileError(f"override {key!r}: {where!r} is not a key of profile {profile_id}"
                                   + (f"; keys here: {', '.join(sorted(node))}" if node else ""))
            if last:
                node[part] = _typed_like(node[part], value, key)
            else:
                node = node[part]
        else:
            raise ProfileError(f"override {key!r}: {'.'.join(parts[:i])!r} is a single value, not a table")


def _typed_like(old: Any, new: Any, key: str) -> Any:
    if isinstance(old, bool):
        if not isinstance(new, bool):
            raise ProfileError(f"override {key!r} must be true or false, not {new!r}")
        return new
    if isinstance(old, (int, float)):
        if isinstance(new, bool) or not isinstance(new, (int, float)):
            raise ProfileError(f"override {key!r} must be a number, not {new!r}")
        return new
    if isinstance(old, str):
        if not isinstance(new, str):
            raise ProfileError(f"override {key!r} must be text, not {new!r}")
        return new
    if isinstance(old, list):
        if not isinstance(new, list):
            raise ProfileError(f"override {key!r} must be a list, not {new!r}")
        return copy.deepcopy(new)
    if isinstance(old, dict):
        if not isinstance(new, dict):
            raise ProfileError(f"override {key!r} must be a table, not {new!r}")
        return copy.deepcopy(new)
    return new


def _check_value(path: str, kind: Any, v: Any, pid: str) -> None:
    def bad(what: str) -> ProfileError:
        return ProfileError(f"profile {pid}: {path} = {v!r} {what}")

    if isinstance(kind, tuple):
        if v not in kind:
            raise bad(f"is not one of: {', '.join(kind)}")
        return
    if isinstance(kind, list):
        if not isinstance(v, list):
            raise bad("must be a list of tables")
        for i, item in enumerate(v):
            if not isinstance(item, dict):
                raise bad(f"item {i} must be a table")
            for k, sub in kind[0].items():
                if k not in item:
                    raise ProfileError(f"profile {pid}: {path}.{i}.{k} is missing")
                _check_value(f"{path}.{i}.{k}", sub, item[k], pid)
            extra = set(item) - set(kind[0])
            if extra:
                raise ProfileError(f"profile {pid}: {path}.{i} has unknown keys {', '.join(sorted(extra))}; "
                                   f"allowed: {', '.join(kind[0])}")
        return
    num = isinstance(v, (int, float)) and not isinstance(v, bool)
    if kind == "str":
        if not isinstance(v, str) or not v.strip():
            raise bad("must be non-empty text")
    elif kind == "strs":
        if not isinstance(v, list) or not all(isinstance(x, str) for x in v):
            raise bad("must be a list of text")
    elif kind == "bool":
        if not isinstance(v, bool):
            raise bad("must be true or false")
    elif kind == "ga":
        try:
            d = parse_ga(v) if isinstance(v, str) else None
        except GAFormatError:
            d = None
        if d is None or not 0 <= d <= GA_MAX_DAYS + 7:
            raise bad(f"must be a gestational age as weeks+days text from 0+0 to {format_ga(GA_MAX_DAYS + 7)}")
    elif kind in ("dose", "dose0"):
        lo = 0 if kind == "dose0" else 1
        if not isinstance(v, int) or isinstance(v, bool) or not lo <= v <= 30000:
            raise bad(f"must be whole IU from {lo} to 30000")
    elif kind == "days":
        if not isinstance(v, int) or isinstance(v, bool) or not 0 <= v <= 366:
            raise bad("must be a whole number from 0 to 366")
    elif kind == "hours":
        if not num or not 0 < v <= 24 * 60:
            raise bad("must be a number of hours above 0 and at most 1440")
    elif kind == "num0":
        if not num or v < 0:
            raise bad("must be a number of at least 0")
    elif kind == "pos":
        if not num or v <= 0:
            raise bad("must be a number above 0")
    elif kind == "fraction":
        if not num or not 0 < v <= 1:
            raise bad("must be a number above 0 and at most 1")
    elif kind == "titre":
        if not isinstance(v, int) or isinstance(v, bool) or v < 1 or v & (v - 1):
            raise bad("must be a titre 1, 2, 4, 8 ... 4096 (the N of 1:N)")
    elif kind == "items":
        if not isinstance(v, list) or any(x not in ITEMS for x in v):
            raise bad(f"must be a list of plan item codes: {', '.join(ITEMS)}")
    elif kind == "kinds":
        if not isinstance(v, list) or any(k != "*" and k not in EVENT_KINDS for k in v):
            raise bad(f"must be a list of event kinds (or [\"*\"] for all): {', '.join(EVENT_KINDS)}")
    elif kind == "titres":
        if not isinstance(v, dict) or "other" not in v:
            raise bad("must be a table of antibody = titre with an 'other' entry")
        for ab, t in v.items():
            _check_value(f"{path}.{ab}", "titre", t, pid)
    elif kind == "quant":
        if not isinstance(v, dict):
            raise bad("must be a table of antibody = {moderate_iu_ml, high_iu_ml}")
        for ab, t in v.items():
            if not isinstance(t, dict) or set(t) != {"moderate_iu_ml", "high_iu_ml"}:
                raise ProfileError(f"profile {pid}: {path}.{ab} must have moderate_iu_ml and high_iu_ml")
            for k in t:
                _check_value(f"{path}.{ab}.{k}", "pos", t[k], pid)
            if t["moderate_iu_ml"] >= t["high_iu_ml"]:
                raise ProfileError(f"profile {pid}: {path}.{ab}.moderate_iu_ml must be below high_iu_ml")
    else:  # pragma: no cover - a mistake in SPEC
        raise AssertionError(kind)


def _validate(data: dict[str, Any]) -> None:
    pid = str(data.get("id", "?"))
    for path, kind in SPEC.items():
        node: Any = data
        for part in path.split("."):
            if not isinstance(node, dict) or part not in node:
                raise ProfileError(f"profile {pid}: {path} is missing")
            node = node[part]
        _check_value(path, kind, node, pid)
    regs = data["routine"].get("regimens")
    if not isinstance(regs, dict) or not regs:
        raise ProfileError(f"profile {pid}: routine.regimens must hold at least one regimen")
    if data["routine"]["regimen"] not in regs:
        raise ProfileError(f"profile {pid}: routine.regimen = {data['routine']['regimen']!r} is not one of: "
                           f"{', '.join(regs)}")
    for name, reg in regs.items():
        if not isinstance(reg, dict) or "doses" not in reg or "title" not in reg:
            raise ProfileError(f"profile {pid}: routine.regimens.{name} needs a title and doses")
        _check_value(f"routine.regimens.{name}.doses", [_DOSE], reg["doses"], pid)
        for i, d in enumerate(reg["doses"]):
            o, c, l_ = parse_ga(d["opens_ga"]), parse_ga(d["closes_ga"]), parse_ga(d["late_until_ga"])
            if not o <= c <= l_:
                raise ProfileError(f"profile {pid}: routine.regimens.{name}.doses.{i}: need opens_ga <= closes_ga "
                                   f"<= late_until_ga")
    fr = data["fetal_rhd"]
    if not parse_ga(fr["opens_ga"]) <= parse_ga(fr["closes_ga"]) <= parse_ga(fr["late_until_ga"]):
        raise ProfileError(f"profile {pid}: fetal_rhd: need opens_ga <= closes_ga <= late_until_ga")
    if data["routine"]["partner_negative_skips_routine"] and not data["routine"]["partner_negative_may_decline"]:
        raise ProfileError(f"profile {pid}: routine.partner_negative_skips_routine = true needs "
                           f"routine.partner_negative_may_decline = true")
    bands = sorted(data["events"]["bands"], key=lambda b: parse_ga(b["from_ga"]))
    if not bands:
        raise ProfileError(f"profile {pid}: events.bands is empty")
    expect = 0
    for i, b in enumerate(bands):
        f, t = parse_ga(b["from_ga"]), parse_ga(b["to_ga"])
        if f != expect or t < f:
            raise ProfileError(f"profile {pid}: events.bands must cover GA from 0+0 without gaps or overlaps "
                               f"(band from {b['from_ga']} to {b['to_ga']}, expected to start at {format_ga(expect)})")
        expect = t + 1
        if b["reduced_dose_if_stocked"] and b["reduced_dose_iu"] < 1:
            raise ProfileError(f"profile {pid}: events.bands.{i}.reduced_dose_iu must be at least 1 "
                               f"when reduced_dose_if_stocked is true")
    if expect <= GA_MAX_DAYS:
        raise ProfileError(f"profile {pid}: events.bands end at {format_ga(expect - 1)}; they must reach "
                           f"{format_ga(GA_MAX_DAYS)}")
    extra = set(data["decisions"]) - set(ITEMS) - {"source"}
    if extra:
        raise ProfileError(f"profile {pid}: decisions names unknown plan items {', '.join(sorted(extra))}; "
                           f"allowed: {', '.join(ITEMS)}")
    for base, entry in data["decisions"].items():
        if base != "source" and entry["only"] and not entry["serves"]:
            raise ProfileError(f"profile {pid}: decisions.{base}: only = true needs the items it serves")
    ab = data["antibody"]
    both = set(ab["clinically_significant"]) & set(ab["not_clinically_significant"])
    if both:
        raise ProfileError(f"profile {pid}: antibody: {', '.join(sorted(both))} cannot be both clinically "
                           f"significant and not")
    s = data["surveillance"]
    if not s["mca_mom_mild"] <= s["mca_mom_moderate"] <= s["mca_mom_severe"]:
        raise ProfileError(f"profile {pid}: surveillance MCA thresholds must rise mild <= moderate <= severe")
    if not s["hb_mom_mild"] >= s["hb_mom_moderate"] >= s["hb_mom_severe"]:
        raise ProfileError(f"profile {pid}: surveillance Hb thresholds must fall mild >= moderate >= severe")
    fm = data["fmh"]
    if fm["rule"] == "vials-per-30ml" and (fm["whole_blood_ml_per_vial"] <= 0 or fm["vial_dose_iu"] < 1):
        raise ProfileError(f"profile {pid}: fmh.rule vials-per-30ml needs whole_blood_ml_per_vial "
                           f"and vial_dose_iu above 0")
    if fm["rule"] == "iu-per-ml" and fm["iu_per_ml_red_cells_im"] <= 0:
        raise ProfileError(f"profile {pid}: fmh.rule iu-per-ml needs iu_per_ml_red_cells_im above 0")


def load_profile(profile_id: str, overrides: Mapping[str, Any] | None = None) -> Profile:
    """Load a shipped profile, apply a facility's dotted-key overrides, check every value."""
    data = _read(profile_id)
    overrides = dict(overrides or {})
    for key in sorted(overrides):
        if not isinstance(key, str) or not key:
            raise ProfileError(f"override key {key!r} must be dotted text such as 'routine.regimen'")
        if key in ("id", "extends"):
            raise ProfileError(f"override {key!r}: the profile id cannot be overridden; choose another profile")
        _apply_override(data, key, overrides[key], profile_id)
    _validate(data)
    if data["id"] != profile_id:
        raise ProfileError(f"profile file {profile_id}.toml declares id {data['id']!r}; they must match")
    if overrides:
        data["version"] = f"{data['version']}+local"
    return Profile(data, overrides)


def list_profiles() -> list[dict[str, str]]:
    """Every shipped profile: id, title, version, source."""
    out = []
    for pid in sorted(_profile_files()):
        d = _read(pid)
        out.append({"id": pid, "title": d.get("title", ""), "version": d.get("version", ""),
                    "source": d.get("source", "")})
    return out
