"""Compare each demo story with what the care engine says about her (used by tests/demo).

    from seed_demo.check import plan_story, story_mismatches
    plan = plan_story(data_dir_of_site, story, now)
    problems = story_mismatches(plan, story, now)   # [] when the engine and the story agree
"""
from __future__ import annotations

from datetime import datetime
from pathlib import Path

from seed_demo.scenario import pregnancy_id
from seed_demo.stories import Story


def plan_story(data_dir: Path, story: Story, now: datetime, store=None):
    """The care engine's plan for the story's pregnancy in the installation at ``data_dir``."""
    from clinic.care_inputs import plan_from_settings
    from clinic.config import load_settings
    from clinic.store import Store

    settings = load_settings(Path(data_dir))
    store = store or Store(data_dir)
    return plan_from_settings(settings, store.history(pregnancy_id(story.key)), now, store=store)


def _matching(plan, prefix: str):
    return [it for it in plan.items if it.code == prefix or it.code.startswith(prefix + ":")
            or it.code.startswith(prefix + "-")]


def story_mismatches(plan, story: Story, now: datetime) -> list[str]:
    """What the engine says differently from the story's ``expect`` (empty when they agree)."""
    ex = story.expect
    out = []
    allowed = (ex.pathway,) if isinstance(ex.pathway, str) else tuple(ex.pathway)
    if plan.pathway not in allowed:
        out.append(f"pathway is {plan.pathway!r}, the story expects {' or '.join(allowed)}")
    managed = (plan.rhd or {}).get("managed_as")
    if ex.managed_as is not None and managed != ex.managed_as:
        out.append(f"managed as {managed!r}, the story expects {ex.managed_as!r}")
    for prefix, states in ex.items.items():
        found = _matching(plan, prefix)
        if not found:
            out.append(f"no item {prefix!r} (items: {', '.join(it.code for it in plan.items)})")
            continue
        if not any(it.state in states for it in found):
            out.append(f"item {prefix!r} is {', '.join(it.state for it in found)}; expected one of {', '.join(states)}")
    for prefix in ex.closes_ahead:
        found = [it for it in _matching(plan, prefix) if it.state in ("due", "overdue")]
        if not found or not any(it.closes is not None and it.closes > now for it in found):
            out.append(f"item {prefix!r} should be open with its deadline (closes) still ahead")
    for prefix, timeliness in ex.timeliness.items():
        found = _matching(plan, prefix)
        if not any(it.timeliness == timeliness for it in found):
            out.append(f"item {prefix!r} timeliness is {', '.join(str(it.timeliness) for it in found) or 'absent'}; "
                       f"expected {timeliness!r}")
    for prefix, iu in ex.doses.items():
        found = [it for it in _matching(plan, prefix) if it.state not in ("not-needed",)]
        if not any(it.dose_iu == iu for it in found):
            out.append(f"item {prefix!r} proposes {', '.join(str(it.dose_iu) for it in found) or 'no'} IU; "
                       f"expected {iu} IU")
    codes = [a.code for a in plan.alerts]
    for prefix in ex.alerts:
        if not any(c == prefix or c.startswith(prefix) for c in codes):
            out.append(f"no alert {prefix!r} (alerts: {', '.join(codes) or 'none'})")
    return out
