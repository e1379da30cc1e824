"""The one validation layer: forms, API, CLI, card import and bundle import all call
``validate_record``. It turns raw input (strings from a form, or JSON values) into the
canonical stored shape, or raises ``ValidationError`` naming each bad field and the
allowed range. Nothing here touches storage.
"""
from __future__ import annotations

import math
from datetime import date, datetime, timedelta, timezone, tzinfo
from typing import Any, Mapping

from clinic.records.schema import IU_PER_UG, KINDS, Field
from clinic.records.values import GAFormatError, format_ga, parse_ga, utc_text

# A phone's clock may run a little ahead of the laptop's.
CLOCK_SKEW = timedelta(minutes=10)


class ValidationError(ValueError):
    """Input that cannot be stored; ``errors`` maps each field to what is wrong with it."""

    def __init__(self, errors: Mapping[str, str], kind: str | None = None):
        self.errors = dict(errors)
        self.kind = kind
        super().__init__("; ".join(f"{k}: {v}" for k, v in self.errors.items()))


class UnknownKind(ValidationError):
    """A record kind the schema does not describe."""


def check_text(s: str) -> None:
    """Text that can be stored, shown and printed: no control characters (line breaks and tabs
    aside) and no broken characters (lone UTF-16 surrogates). ValueError says which and where."""
    for i, ch in enumerate(s):
        o = ord(ch)
        if (o < 0x20 and ch not in "\n\r\t") or 0x7F <= o < 0xA0:
            raise ValueError(f"contains a control character (U+{o:04X}, character {i + 1}), which cannot be "
                             f"stored or printed: remove it (retype the text if it was pasted)")
        if 0xD800 <= o <= 0xDFFF:
            raise ValueError(f"contains a broken character (U+{o:04X}, character {i + 1}, half of a UTF-16 pair): "
                             f"retype the text")


def _empty(v: Any) -> bool:
    return v is None or (isinstance(v, str) and v.strip() == "") or (isinstance(v, (list, tuple)) and not v)


def _range_text(f: Field) -> str:
    if f.type == "ga":
        assert f.min is not None and f.max is not None  # every GA field has both limits (schema._ga)
        return f"{format_ga(int(f.min))} to {format_ga(int(f.max))} weeks+days"
    if f.min is not None and 0 < f.min < 0.001:
        # A "positive number" field: its tiny minimum is not a value anyone should read.
        return "above 0" + ("" if f.max is None else f" and at most {f.max:g}")
    lo = "" if f.min is None else f"{f.min:g}"
    hi = "" if f.max is None else f"{f.max:g}"
    return f"{lo} to {hi}"


def _coerce(f: Field, v: Any, now: datetime, tz: tzinfo) -> Any:
    """Return the canonical value or raise ValueError with a message for the user."""
    t = f.type
    if t == "str" or t == "ref":
        if not isinstance(v, (str, int)):
            raise ValueError("must be text")
        s = str(v).strip()
        if len(s) > f.max_length:
            raise ValueError(f"is {len(s)} characters long; at most {f.max_length} allowed")
        check_text(s)
        return s
    if t == "bool":
        if isinstance(v, bool):
            return v
        s = str(v).strip().lower()
        if s in ("1", "true", "yes", "on", "y"):
            return True
        if s in ("0", "false", "no", "off", "n"):
            return False
        raise ValueError("must be yes or no")
    if t in ("int", "float"):
        if isinstance(v, bool):
            raise ValueError("must be a number")
        try:
            x = float(str(v).strip().replace(",", ".")) if not isinstance(v, (int, float)) else float(v)
        except ValueError:
            raise ValueError(f"must be a number ({_range_text(f)})") from None
        if not math.isfinite(x):
            raise ValueError(f"must be a finite number ({_range_text(f)})")
        if t == "int":
            if x != int(x):
                raise ValueError(f"must be a whole number ({_range_text(f)})")
            x = int(x)
        if (f.min is not None and x < f.min) or (f.max is not None and x > f.max):
            raise ValueError(f"{x:g} is outside the allowed range {_range_text(f)}")
        return x
    if t == "ga":
        try:
            days = parse_ga(v)  # an int is days (JSON); text is weeks+days or weeks (forms)
        except GAFormatError as e:
            raise ValueError(str(e)) from None
        assert f.min is not None and f.max is not None  # every GA field has both limits (schema._ga)
        if days < f.min or days > f.max:
            raise ValueError(f"{format_ga(days)} is outside the allowed range {_range_text(f)}")
        return days
    if t == "choice":
        if isinstance(v, bool):  # True == 1 in Python: never a titre of 1:1
            raise ValueError(f"{v!r} is not one of: {', '.join(str(c) for c in f.choices)}")
        for c in f.choices:
            if v == c or str(v).strip() == str(c):
                return c
        raise ValueError(f"{v!r} is not one of: {', '.join(str(c) for c in f.choices)}")
    if t == "choices":
        items = v if isinstance(v, (list, tuple)) else [x for x in str(v).split(",")]
        out = []
        for item in items:
            item = str(item).strip()
            if not item:
                continue
            if item not in f.choices:
                raise ValueError(f"{item!r} is not one of: {', '.join(f.choices)}")
            if item not in out:
                out.append(item)
        return out
    if t == "date":
        if isinstance(v, datetime):
            d = v.date()
        elif isinstance(v, date):
            d = v
        else:
            text = str(v).strip()
            try:
                if len(text) > 10 and text[10] in "T ":
                    # A date and time given for a date: the date as written (the time must parse too).
                    datetime.fromisoformat(text.replace("Z", "+00:00").replace(" ", "T", 1))
                    text = text[:10]
                d = date.fromisoformat(text)
            except ValueError:
                raise ValueError(f"{v!r} is not a date (YYYY-MM-DD)") from None
        if f.not_future and d > (now.astimezone(tz) + CLOCK_SKEW).date():
            raise ValueError(f"{d.isoformat()} is in the future; the latest allowed is today")
        if d.year < 1900:
            raise ValueError(f"{d.isoformat()} is before 1900")
        return d.isoformat()
    if t == "datetime":
        if isinstance(v, datetime):
            dt = v
        else:
            s = str(v).strip().replace(" ", "T")
            try:
                dt = datetime.fromisoformat(s.replace("Z", "+00:00"))
            except ValueError:
                raise ValueError(f"{v!r} is not a date and time (YYYY-MM-DDTHH:MM)") from None
        if dt.tzinfo is None:
            # Local wall-clock time at the facility.
            dt = dt.replace(tzinfo=tz)
        if f.not_future and dt > now + CLOCK_SKEW:
            when = dt.astimezone(tz).strftime("%Y-%m-%d %H:%M")
            raise ValueError(f"{when} is in the future; the latest allowed is now")
        if dt.year < 1900:
            raise ValueError("is before 1900")
        return utc_text(dt)
    raise AssertionError(f"schema field {f.name} has unknown type {t}")


def validate_fields(kind: str, raw: Mapping[str, Any], *, now: datetime, tz: tzinfo,
                    partial: bool = False) -> dict[str, Any]:
    """Validate the fields of one kind.

    With ``partial`` (an amendment) only the fields given are checked, and a field given
    as empty clears it unless it is required. Unknown fields are refused: a typo must not
    silently drop data.
    """
    spec = KINDS.get(kind)
    if spec is None:
        raise UnknownKind({"kind": f"{kind!r} is not a record kind; allowed: {', '.join(KINDS)}"})
    if now.tzinfo is None:
        raise ValueError("now must be timezone-aware")
    errors: dict[str, str] = {}
    out: dict[str, Any] = {}
    known = set(spec.field_names)
    for key in raw:
        if key not in known:
            errors[key] = f"is not a field of {spec.label.lower()}; fields are: {', '.join(spec.field_names)}"
    for f in spec.fields:
        if f.name not in raw:
            if f.required and not partial:
                errors[f.name] = "is required"
            continue
        v = raw[f.name]
        if _empty(v):
            if f.required:
                errors[f.name] = "is required"
            elif partial:
                out[f.name] = None
            continue
        try:
            out[f.name] = _coerce(f, v, now, tz)
        except ValueError as e:
            errors[f.name] = str(e)
    if errors:
        raise ValidationError(errors, kind)
    return out


def validate_record(kind: str, raw: Mapping[str, Any], *, now: datetime, tz: tzinfo = timezone.utc,
                    current: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """Validate a whole record (or, with ``current``, the merged result of an amendment).

    Returns the canonical fields. Raises ValidationError naming every bad field.
    """
    spec = KINDS.get(kind)
    if spec is None:
        raise UnknownKind({"kind": f"{kind!r} is not a record kind; allowed: {', '.join(KINDS)}"})
    if current is None:
        fields = validate_fields(kind, raw, now=now, tz=tz)
    else:
        changes = validate_fields(kind, raw, now=now, tz=tz, partial=True)
        fields = {k: current[k] for k in spec.field_names if k in current and current[k] is not None}
        for k, v in changes.items():
            if v is None:
                fields.pop(k, None)
            else:
                fields[k] = v
    errors: dict[str, str] = {}
    for name in spec.cross_checks:
        CROSS_CHECKS[name](fields, errors)
    if errors:
        raise ValidationError(errors, kind)
    return fields


# ---- checks that span fields -------------------------------------------------------

def _birth_date_or_age(r, errors):
    if "birth_date" not in r and "stated_age" not in r:
        errors["birth_date"] = "give the date of birth or, when it is not known, the stated age"


def _gravidity_parity(r, errors):
    g, p = r.get("gravidity"), r.get("parity")
    if g is not None and p is not None and p >= g:
        errors["parity"] = f"parity {p} must be less than gravidity {g} (this pregnancy counts in gravidity)"


def _dating_present(r, errors):
    if not any(k in r for k in ("lmp", "scan_crl_mm", "scan_ga_days", "edd")):
        errors["lmp"] = "give the LMP, a dating scan (CRL or GA), or the agreed EDD"
    if "lmp" in r and "booked_on" in r:
        gap = (date.fromisoformat(r["booked_on"]) - date.fromisoformat(r["lmp"])).days
        if gap < 0:
            errors["lmp"] = "is after the booking date"
        elif gap > 44 * 7:
            errors["lmp"] = f"is {gap // 7} weeks before booking; at most 44 weeks allowed"


def _scan_pair(r, errors):
    has_scan = "scan_crl_mm" in r or "scan_ga_days" in r
    if has_scan and "scan_on" not in r:
        errors["scan_on"] = "is required with a scan measurement"
    if "scan_on" in r and not has_scan:
        errors["scan_crl_mm"] = "give the CRL or the GA by the scan"


def _d_variant_detail(r, errors):
    if r.get("weak_d_type") and r.get("rhd") != "weak-d":
        errors["weak_d_type"] = "only applies when RhD is weak D"
    if r.get("partial_d_category") and r.get("rhd") != "partial-d":
        errors["partial_d_category"] = "only applies when RhD is partial D"


def _screen_consistency(r, errors):
    abs_ = r.get("antibodies") or []
    if r.get("result") == "negative" and abs_:
        errors["antibodies"] = "a negative screen has no antibodies identified"
    if r.get("result") == "negative" and ("titre" in r or "anti_d_iu_ml" in r):
        errors["titre"] = "a negative screen has no titre or quantitation"
    if "other" in abs_ and not r.get("antibody_other"):
        errors["antibody_other"] = "name the other antibody"
    if "titre" in r:
        target = r.get("titre_antibody") or (abs_[0] if abs_ else None)
        if target is None:
            errors["titre_antibody"] = "say which antibody the titre is for"
        elif target not in abs_:
            errors["titre_antibody"] = f"{target} is not among the antibodies identified"
        else:
            r["titre_antibody"] = target
    if ("anti_d_iu_ml" in r or "anti_d_origin" in r) and "anti-D" not in abs_:
        errors["anti_d_origin"] = "anti-D quantitation and origin apply only when anti-D is identified"


def _fmh_method_fields(r, errors):
    m = r.get("method")
    if m == "rosette" and "rosette_result" not in r:
        errors["rosette_result"] = "is required for a rosette test"
    if m in ("kleihauer-betke", "flow-cytometry"):
        has_counts = "fetal_cells" in r and "cells_counted" in r
        if not has_counts and "fetal_cell_percent" not in r:
            errors["fetal_cells"] = "give fetal cells and total cells counted, or the fetal cell %"
        if has_counts and r["fetal_cells"] > r["cells_counted"]:
            errors["fetal_cells"] = "cannot be more than the total cells counted"


def _dose_canonical(r, errors):
    # 1 µg = 5 IU (BSH 2014, Qureshi et al.); store whole IU.
    amount, unit = r.get("amount"), r.get("unit")
    if amount is None or unit is None:
        return
    iu = amount * IU_PER_UG if unit == "ug" else amount
    if iu < 1:
        errors["amount"] = "must be at least 1 IU (0.2 µg)"
        return
    r["dose_iu"] = int(round(iu))
    # An expired lot is not refused here (the dose was given): the care engine alerts on it.


def _hb_or_hct(r, errors):
    if "hb_g_dl" not in r and "hct_pct" not in r:
        errors["hb_g_dl"] = "give the fetal Hb or the Hct"


CROSS_CHECKS = {
    "birth_date_or_age": _birth_date_or_age,
    "gravidity_parity": _gravidity_parity,
    "dating_present": _dating_present,
    "scan_pair": _scan_pair,
    "d_variant_detail": _d_variant_detail,
    "screen_consistency": _screen_consistency,
    "fmh_method_fields": _fmh_method_fields,
    "dose_canonical": _dose_canonical,
    "hb_or_hct": _hb_or_hct,
}
