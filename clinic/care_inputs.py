"""The care engine's inputs from an installation's settings, built in one place.

    profile, context = care_inputs(settings)
    plan = plan_from_settings(settings, store.history(pregnancy_id), now, store=store)

A facility plans with its protocol profile (with its local overrides) and a ``CareContext``
(population RhD-negative frequency, default maternal blood volume, stocked products, time
zone). The web app, the CLI, card issue, reports and the demo all get both from here, so they
plan alike. The district plans a clinic's pregnancies from the care header of that clinic's
bundle through the same ``build_inputs``.

Above ``clinic.care`` and beside ``clinic.config``; it reads no files but the profiles.
"""
from __future__ import annotations

import threading
from typing import Any, Iterable, Mapping
from zoneinfo import ZoneInfo

from clinic.care import CareContext, CareError, Plan, Product, Profile, load_profile, plan_pregnancy
from clinic.care.model import EarlierPregnancy
from clinic.care.planning.carried import summarise_earlier

# Loading a profile parses and checks its TOML chain; a page or a report plans many pregnancies
# with the same few inputs. Profiles are never changed once loaded, so one can be shared.
_CACHE: dict[tuple, tuple[Profile, CareContext]] = {}
_CACHE_MAX = 32
_LOCK = threading.Lock()


def _frozen(value: Any) -> Any:
    """A hashable form of an override value that keeps its type (1, 1.0 and True differ)."""
    if isinstance(value, Mapping):
        return ("map", tuple(sorted((str(k), _frozen(v)) for k, v in value.items())))
    if isinstance(value, (list, tuple)):
        return ("list", tuple(_frozen(v) for v in value))
    return (type(value).__name__, value)


def build_inputs(profile_id: str, overrides: Mapping[str, Any] | None, *, timezone: str,
                 products: Iterable[Product] = (), rhd_negative_frequency: float = 0.15,
                 maternal_blood_volume_ml: float = 5000.0) -> tuple[Profile, CareContext]:
    """The profile ``profile_id`` with ``overrides`` applied, and the facility's CareContext.

    ``timezone`` is an IANA name. Raises ProfileError (a CareError) when the profile cannot be
    loaded or an override is out of range; nothing is cached then.
    """
    overrides = dict(overrides or {})
    products = tuple(products)
    key = (str(profile_id), _frozen(overrides), str(timezone), products, float(rhd_negative_frequency),
           float(maternal_blood_volume_ml))
    with _LOCK:
        hit = _CACHE.get(key)
    if hit is not None:
        return hit
    profile = load_profile(profile_id, overrides=overrides)
    context = CareContext(rhd_negative_frequency=float(rhd_negative_frequency),
                          maternal_blood_volume_ml=float(maternal_blood_volume_ml),
                          products=products, tz=ZoneInfo(timezone))
    with _LOCK:
        if len(_CACHE) >= _CACHE_MAX:
            _CACHE.clear()
        _CACHE[key] = (profile, context)
    return profile, context


def care_inputs(settings) -> tuple[Profile, CareContext]:
    """The profile and CareContext of an installation's ``clinic.config.Settings``."""
    return build_inputs(settings.profile, settings.profile_overrides, timezone=settings.timezone,
                        products=settings.products, rhd_negative_frequency=settings.rhd_negative_frequency,
                        maternal_blood_volume_ml=settings.maternal_blood_volume_ml)


def earlier_pregnancies(settings, store, pregnancy: dict, now) -> list[EarlierPregnancy]:
    """The woman's pregnancies booked before ``pregnancy`` in ``store`` (a clinic.store.Store, or
    anything with ``pregnancies_of_woman`` and ``history``), each summarised from its own plan at
    ``now``. One whose plan cannot be worked out is handed on with its problem, never dropped."""
    woman_id = pregnancy.get("woman_id")
    if not woman_id:
        return []
    def order(p: dict) -> tuple[str, str]:
        return (p.get("booked_on") or "", p.get("created_at") or "")

    # Booked before this one (a pregnancy read from a card need not be in the store yet).
    before = [p for p in store.pregnancies_of_woman(woman_id)
              if not p.get("voided") and p["id"] != pregnancy.get("id") and order(p) < order(pregnancy)]
    profile, context = care_inputs(settings)
    out = []
    for p in before:
        woman, preg, entries = store.history(p["id"])
        try:
            plan = plan_pregnancy(woman, preg, entries, now=now, profile=profile, context=context)
        except CareError as e:
            out.append(EarlierPregnancy(p["id"], p.get("booked_on"), problem=str(e)))
            continue
        out.append(summarise_earlier(preg, entries, plan, tz=context.tz))
    return out


def plan_from_settings(settings, history: tuple[dict, dict, list[dict]], now, *, store=None) -> Plan:
    """The care engine's plan of one pregnancy as this installation sees it at ``now`` (aware).

    ``history`` is ``(woman, pregnancy, entries)`` as ``Store.history`` returns it. With ``store``
    the woman's earlier pregnancies there are planned too and handed on (``earlier_pregnancies``):
    a dose missed or an antibody found in one raises an alert in this plan.
    """
    woman, pregnancy, entries = history
    profile, context = care_inputs(settings)
    earlier = earlier_pregnancies(settings, store, pregnancy, now) if store is not None else []
    return plan_pregnancy(woman, pregnancy, entries, now=now, profile=profile, context=context, earlier=earlier)
