"""Indicators of booking and typing, and of RhD-negative women at booking."""
from __future__ import annotations

from collections.abc import Iterator
from datetime import tzinfo

from clinic.care.codes import ItemCode
from clinic.reports.indicators.registry import S_BOOK, S_NEG, Hit, booked_in, booking_due, indicator
from clinic.reports.month import Month
from clinic.reports.pregnancy_case import Case, as_dt, attr, done, planned


@indicator("bookings", S_BOOK, "Bookings",
           "Pregnancies whose booking date falls in the month.",
           "pregnancies booked in the month", None)
def _bookings(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    if booked_in(case, month):
        yield Hit(case, True, "booked", due=booking_due(case, tz))


@indicator("typed_at_booking", S_BOOK, "RhD typed at booking",
           "Of the pregnancies booked in the month, those whose maternal ABO/RhD typing the care "
           "engine counts as done (a valid result recorded for this pregnancy).",
           "booked and typed", "pregnancies booked in the month")
def _typed(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    if not booked_in(case, month):
        return
    it = case.item(ItemCode.BOOKING_TYPING)
    ok = done(it)
    yield Hit(case, ok, "typed" if ok else "not-typed",
              None if ok else "RhD typing not recorded", ItemCode.BOOKING_TYPING, booking_due(case, tz))


@indicator("rhd_negative_share", S_BOOK, "RhD-negative among those typed",
           "Of the pregnancies booked in the month and typed, those the care engine manages as "
           "RhD negative (including D variants the profile manages as negative).",
           "managed as RhD negative", "booked in the month and typed")
def _neg_share(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    if not booked_in(case, month) or not done(case.item(ItemCode.BOOKING_TYPING)):
        return
    yield Hit(case, case.managed_as == "negative", case.managed_as or "")


def _neg_booked(case: Case, month: Month) -> bool:
    return booked_in(case, month) and case.managed_as == "negative"


@indicator("neg_screen_at_booking", S_NEG, "Antibody screen at booking",
           "Of the RhD-negative women booked in the month, those whose booking antibody screen "
           "the care engine counts as done.",
           "screened at booking", "RhD-negative women booked in the month")
def _neg_screen(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    if not _neg_booked(case, month):
        return
    it = case.item(ItemCode.BOOKING_SCREEN)
    ok = done(it)
    yield Hit(case, ok, "screened" if ok else "not-screened",
              None if ok else "booking antibody screen not recorded", ItemCode.BOOKING_SCREEN,
              as_dt(attr(it, "closes")) or booking_due(case, tz))


@indicator("neg_partner_typed", S_NEG, "Partner typed",
           "Of the RhD-negative women booked in the month for whom the care engine plans partner "
           "typing (its 'partner-typing' item, not 'not needed'; one closed as 'no longer needed' was "
           "planned and counts as not typed), those whose item the engine counts as done (the baby's "
           "father's RhD recorded as positive or negative).",
           "partner RhD known", "RhD-negative women booked in the month (partner typing planned)")
def _partner(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    it = case.item(ItemCode.PARTNER_TYPING)
    if not _neg_booked(case, month) or not planned(it):
        return
    ok = done(it)
    yield Hit(case, ok, "partner-typed" if ok else "partner-not-typed", None, ItemCode.PARTNER_TYPING,
              as_dt(attr(it, "closes")) or booking_due(case, tz), attr(it, "done_record_id"))


@indicator("neg_fetal_rhd", S_NEG, "Fetal RHD tested (where used)",
           "Of the RhD-negative women booked in the month for whom the care engine plans a cell-free "
           "fetal RHD test (its 'fetal-rhd-test' item, not 'not needed': the profile uses targeted "
           "prophylaxis; one closed as 'no longer needed' was planned and counts as not tested), those "
           "whose test the engine counts as done. Empty where the profile does not use the test.",
           "fetal RHD result recorded", "RhD-negative women booked in the month (fetal RHD test planned)")
def _fetal(case: Case, month: Month, tz: tzinfo) -> Iterator[Hit]:
    it = case.item(ItemCode.FETAL_RHD_TEST)
    if not _neg_booked(case, month) or not planned(it):
        return
    ok = done(it)
    yield Hit(case, ok, "tested" if ok else "not-tested", None, ItemCode.FETAL_RHD_TEST, booking_due(case, tz),
              attr(it, "done_record_id"))
