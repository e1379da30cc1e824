"""The care engine's vocabulary: plan item codes, their categories, alert codes, states, pathways.

Every module that writes or reads these names (the planner, the web pages, the card, the
district report) takes them from here. The strings themselves are stable: cards, bundles,
the API, stored reports and the tests rely on them, so a value here never changes; a new
item or alert adds a name.

An item code is a base (``booking-typing``), a base and a number (``routine-dose-2``: the
routine dose of that number) or a base and a record id (``event-dose:<event id>``: the item
belongs to that event). ``parse_item_code`` splits a code into the two.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Final


class Category:
    """``PlanItem.category``: the Today filters and the reports group items by it."""

    TYPING: Final = "typing"
    SCREEN: Final = "screen"
    ROUTINE: Final = "routine"
    EVENT: Final = "event"
    POSTPARTUM: Final = "postpartum"
    BIRTH: Final = "birth"
    SURVEILLANCE: Final = "surveillance"


CATEGORIES: Final = (Category.TYPING, Category.SCREEN, Category.ROUTINE, Category.EVENT, Category.POSTPARTUM,
                     Category.BIRTH, Category.SURVEILLANCE)


class ItemCode:
    """Plan item codes. Those marked "base" take a number or a record id (see the helpers below)."""

    BOOKING_TYPING: Final = "booking-typing"
    BOOKING_SCREEN: Final = "booking-screen"
    PARTNER_TYPING: Final = "partner-typing"
    FETAL_RHD_TEST: Final = "fetal-rhd-test"
    PRE_DOSE_SCREEN: Final = "pre-dose-screen"
    ANTIBODY_IDENTIFICATION: Final = "antibody-identification"  # base: antibody-identification:<screen id>
    ANTI_D_QUANTITATION: Final = "anti-d-quantitation"          # base: anti-d-quantitation:<screen id>
    ROUTINE_DOSE: Final = "routine-dose"            # base: routine-dose-<number>
    EVENT_DOSE: Final = "event-dose"                # base: event-dose:<event id>
    EVENT_FMH: Final = "event-fmh"                  # base: event-fmh:<event id> (the FMH test)
    EVENT_FMH_DOSE: Final = "event-fmh-dose"        # base: event-fmh-dose:<event id> (more anti-D)
    EVENT_REPEAT: Final = "event-repeat"            # base: event-repeat:<event id> (continuing bleeding)
    CORD_TYPING: Final = "cord-typing"
    POSTPARTUM_DOSE: Final = "postpartum-dose"
    POSTPARTUM_FMH: Final = "postpartum-fmh"
    POSTPARTUM_FMH_DOSE: Final = "postpartum-fmh-dose"
    SURVEILLANCE_TITRE: Final = "surveillance-titre"
    SURVEILLANCE_REFERRAL: Final = "surveillance-referral"
    SURVEILLANCE_DOPPLER: Final = "surveillance-doppler"


@dataclass(frozen=True)
class ItemSpec:
    """What the vocabulary knows about one item base."""

    base: str
    category: str
    ref: str                   # what follows the base: "" (nothing), "number" or "record" (a record id)
    completed_by: str | None   # the record kind whose entry completes it (None: no entry form for it)

    @property
    def gives_anti_d(self) -> bool:
        return self.completed_by == "dose"


_C, _I = Category, ItemCode
ITEMS: Final[dict[str, ItemSpec]] = {s.base: s for s in (
    ItemSpec(_I.BOOKING_TYPING, _C.TYPING, "", "typing"),
    ItemSpec(_I.BOOKING_SCREEN, _C.SCREEN, "", "screen"),
    ItemSpec(_I.PARTNER_TYPING, _C.TYPING, "", "partner_typing"),
    ItemSpec(_I.FETAL_RHD_TEST, _C.TYPING, "", "fetal_rhd"),
    ItemSpec(_I.PRE_DOSE_SCREEN, _C.SCREEN, "", "screen"),
    ItemSpec(_I.ANTIBODY_IDENTIFICATION, _C.SCREEN, "record", "screen"),
    ItemSpec(_I.ANTI_D_QUANTITATION, _C.SCREEN, "record", "screen"),
    ItemSpec(_I.ROUTINE_DOSE, _C.ROUTINE, "number", "dose"),
    ItemSpec(_I.EVENT_DOSE, _C.EVENT, "record", "dose"),
    ItemSpec(_I.EVENT_FMH, _C.EVENT, "record", "fmh"),
    ItemSpec(_I.EVENT_FMH_DOSE, _C.EVENT, "record", "dose"),
    ItemSpec(_I.EVENT_REPEAT, _C.EVENT, "record", "dose"),
    ItemSpec(_I.CORD_TYPING, _C.BIRTH, "", "birth"),
    ItemSpec(_I.POSTPARTUM_DOSE, _C.POSTPARTUM, "", "dose"),
    ItemSpec(_I.POSTPARTUM_FMH, _C.POSTPARTUM, "", "fmh"),
    ItemSpec(_I.POSTPARTUM_FMH_DOSE, _C.POSTPARTUM, "", "dose"),
    ItemSpec(_I.SURVEILLANCE_TITRE, _C.SURVEILLANCE, "", "screen"),
    # Done by a referral record, but no entry form is offered from the item (the referral is
    # recorded from her record page); naming "referral" here would add that link.
    ItemSpec(_I.SURVEILLANCE_REFERRAL, _C.SURVEILLANCE, "", None),
    ItemSpec(_I.SURVEILLANCE_DOPPLER, _C.SURVEILLANCE, "", "doppler"),
)}

# Item base code -> the record kind whose entry completes it ("dose" for an anti-D item).
COMPLETED_BY: Final[dict[str, str]] = {b: s.completed_by for b, s in ITEMS.items() if s.completed_by}


def routine_dose_code(number: int) -> str:
    return f"{ItemCode.ROUTINE_DOSE}-{number}"


def event_dose_code(event_id: str) -> str:
    return f"{ItemCode.EVENT_DOSE}:{event_id}"


def event_fmh_code(event_id: str) -> str:
    return f"{ItemCode.EVENT_FMH}:{event_id}"


def event_fmh_dose_code(event_id: str) -> str:
    return f"{ItemCode.EVENT_FMH_DOSE}:{event_id}"


def event_repeat_code(event_id: str) -> str:
    return f"{ItemCode.EVENT_REPEAT}:{event_id}"


def antibody_identification_code(screen_id: str) -> str:
    return f"{ItemCode.ANTIBODY_IDENTIFICATION}:{screen_id}"


def anti_d_quantitation_code(screen_id: str) -> str:
    return f"{ItemCode.ANTI_D_QUANTITATION}:{screen_id}"


def parse_item_code(code: str) -> tuple[str, str | None]:
    """``"event-dose:e1"`` -> ``("event-dose", "e1")``; ``"routine-dose-2"`` -> ``("routine-dose", "2")``;
    ``"cord-typing"`` -> ``("cord-typing", None)``. A code the vocabulary does not know comes back
    whole as its own base (``item_spec`` then says None)."""
    base, sep, ref = code.partition(":")
    if sep:
        return base, ref
    head, _, number = code.rpartition("-")
    spec = ITEMS.get(head)
    if number.isdigit() and spec is not None and spec.ref == "number":
        return head, number
    return code, None


def item_spec(code: str) -> ItemSpec | None:
    return ITEMS.get(parse_item_code(code)[0])


def category_of(code: str) -> str:
    """The category of an item code; a code the vocabulary does not know is a programming error."""
    spec = item_spec(code)
    if spec is None:
        raise KeyError(f"plan item code {code!r} is not in clinic.care.codes.ITEMS")
    return spec.category


def completed_by(code: str) -> str | None:
    """The record kind whose entry completes the item (None: none, or a code not known)."""
    spec = item_spec(code)
    return spec.completed_by if spec else None


def gives_anti_d(code: str) -> bool:
    """Is this an anti-D dose item (routine, event, repeat, FMH top-up, postpartum)?"""
    spec = item_spec(code)
    return spec is not None and spec.gives_anti_d


class AlertCode:
    """``Alert.code`` of every alert the engine (and the Today page) raises."""

    # RhD typing
    TYPING_DISCORDANT: Final = "typing-discordant"
    TYPING_INCONCLUSIVE: Final = "typing-inconclusive"
    WEAK_D_GENOTYPE: Final = "weak-d-genotype"
    # fetal RhD and the father's typing
    FETAL_RHD_NEGATIVE_NOT_USED: Final = "fetal-rhd-negative-not-used"
    PARTNER_RHD_NEGATIVE: Final = "partner-rhd-negative"
    # antibodies: is an anti-D passive or immune?
    IMMUNE_ANTI_D: Final = "immune-anti-d"         # record_ids: the screens judged immune, first first
    ANTI_D_ORIGIN_CHECK: Final = "anti-d-origin-check"
    ANTI_D_PASSIVE: Final = "anti-d-passive"
    ANTI_D_UNDETERMINED: Final = "anti-d-undetermined"
    ANTIBODY_UNIDENTIFIED: Final = "antibody-unidentified"   # a positive screen without a known antibody
    ANTIBODY_NOT_SIGNIFICANT: Final = "antibody-not-significant"
    # doses as recorded
    DUPLICATE_DOSE: Final = "duplicate-dose"
    LOT_EXPIRED: Final = "lot-expired"
    ROUTINE_EXTRA: Final = "routine-extra"
    POSTPARTUM_DOSE_WITHOUT_BIRTH: Final = "postpartum-dose-without-birth"
    DOSE_UNMATCHED: Final = "dose-unmatched"
    DOSE_RHD_POSITIVE: Final = "dose-rhd-positive"
    DOSE_AFTER_SENSITISATION: Final = "dose-after-sensitisation"
    DOSE_ABOVE_ALLOWED: Final = "dose-above-allowed"
    DOSE_LARGE_IM: Final = "dose-large-im"
    DOSE_BELOW_REQUIRED: Final = "dose-below-required"
    # routine prophylaxis
    ROUTINE_BEFORE_SCREEN: Final = "routine-before-screen"
    # sensitising events and FMH
    EVENT_GA_UNUSUAL: Final = "event-ga-unusual"
    EARLY_BLEEDING_CHECK: Final = "early-bleeding-check"
    EVENT_DOSE_OVERDUE: Final = "event-dose-overdue"
    EVENT_DOSE_MISSED: Final = "event-dose-missed"
    FMH_ROSETTE_POSITIVE: Final = "fmh-rosette-positive"
    FMH_UNREADABLE: Final = "fmh-unreadable"
    FMH_LARGE: Final = "fmh-large"
    FMH_LARGE_IM: Final = "fmh-large-im"
    # birth
    BABY_DAT_POSITIVE: Final = "baby-dat-positive"
    POSTPARTUM_DOSE_BABY_NEGATIVE: Final = "postpartum-dose-baby-negative"
    POSTPARTUM_DOSE_OVERDUE: Final = "postpartum-dose-overdue"
    POSTPARTUM_DOSE_MISSED: Final = "postpartum-dose-missed"
    # surveillance
    ANTIBODY_FOUND: Final = "antibody-found"
    ANTIBODY_CRITICAL: Final = "antibody-critical"
    TITRE_RISE: Final = "titre-rise"
    DELIVERY_TIMING: Final = "delivery-timing"
    MCA_PSV: Final = "mca-psv"
    FETAL_HB: Final = "fetal-hb"
    NEONATAL_FOLLOW_UP: Final = "neonatal-follow-up"
    # what an earlier pregnancy hands on (plan_pregnancy's earlier=)
    EARLIER_DOSE_MISSED: Final = "earlier-dose-missed"        # record_ids: the earlier pregnancy, this one's screen
    EARLIER_ANTIBODY: Final = "earlier-antibody"
    EARLIER_PREGNANCY_UNREADABLE: Final = "earlier-pregnancy-unreadable"
    # the clock: entries dated after now (kept and counted; this computer's clock may be behind)
    CLOCK_BEHIND: Final = "clock-behind"
    # not the engine's: the Today page, when a pregnancy's plan cannot be worked out
    PLAN_FAILED: Final = "plan-failed"


ALERT_CODES: Final = frozenset(v for k, v in vars(AlertCode).items() if k.isupper())

# PlanItem.state, Alert.severity and Plan.pathway.
STATES: Final = ("not-yet-due", "due", "overdue", "done", "not-needed", "missed")
OPEN_STATES: Final = ("not-yet-due", "due", "overdue")   # something still to do

# The reason of an item that was planned but closed because the choice it informs was made or
# has passed (a ``not-needed`` item that starts so): not missed, yet once asked for.
NO_LONGER_NEEDED: Final = "no longer needed"


def lapsed(state: str | None, reason: str | None) -> bool:
    """Was this item planned and then closed as no longer needed (its decision gone)?"""
    return state == "not-needed" and (reason or "").startswith(NO_LONGER_NEEDED)
SEVERITIES: Final = ("danger", "warning", "info")
PATHWAYS: Final = ("prophylaxis", "not-needed", "surveillance", "retest", "untyped", "ended")
PATHWAY_WORDS: Final = {"prophylaxis": "anti-D prophylaxis", "not-needed": "anti-D not needed",
                        "surveillance": "surveillance (sensitised: no anti-D prophylaxis)",
                        "retest": "retest her RhD", "untyped": "not yet typed", "ended": "ended"}
