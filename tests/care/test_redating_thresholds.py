"""Which dating to use when LMP and ultrasound disagree.

acog-2017 follows ACOG Committee Opinion 700 (2017), Table 1 (thresholds read as reproduced in
published summaries of CO 700; that its GA ranges are by LMP on the day of the scan is from
memory): re-date by the scan when the difference is more than 5 days before 9+0, more than 7 days at 9+0 to 13+6,
more than 7 days at 14+0 to 15+6, more than 10 days at 16+0 to 21+6, more than 14 days at
22+0 to 27+6, more than 21 days from 28+0. bsh-2014 dates by the scan whenever there is one
(NICE NG201, 2021, from memory)."""
from datetime import date, timedelta

import pytest

from clinic.care import choose_dating, load_profile
from clinic.records.values import parse_ga


def _acog(lmp, scan_on, scan_ga):
    p = load_profile("acog-2017")
    th = [(parse_ga(t["below_ga"]), t["days"]) for t in p.get("dating.redate_thresholds")]
    return choose_dating(lmp=lmp, scan_on=scan_on, scan_ga_days=scan_ga, rule="acog-co700", thresholds=th)


@pytest.mark.parametrize("scan_ga_text, limit", [
    ("8+0", 5),    # up to 8+6: more than 5 days (ACOG CO 700 Table 1)
    ("9+0", 7),    # 9+0 to 13+6: more than 7 days
    ("13+6", 7),
    ("15+0", 7),   # 14+0 to 15+6: more than 7 days
    ("16+0", 10),  # 16+0 to 21+6: more than 10 days
    ("22+0", 14),  # 22+0 to 27+6: more than 14 days
    ("30+0", 21),  # from 28+0: more than 21 days
])
def test_acog_redates_only_beyond_the_threshold(scan_ga_text, limit):
    lmp = date(2026, 3, 1)
    lmp_ga = parse_ga(scan_ga_text)
    scan_on = lmp + timedelta(days=lmp_ga)
    # scan says the pregnancy is `limit` days further on: keep the LMP (difference = limit)
    keep = _acog(lmp, scan_on, lmp_ga + limit)
    assert keep.method == "lmp" and abs(keep.difference_days) == limit
    # one day more: re-date by the scan
    redated = _acog(lmp, scan_on, lmp_ga + limit + 1)
    assert redated.method == "scan"
    assert redated.edd == scan_on + timedelta(days=280 - (lmp_ga + limit + 1))


def test_bsh_profile_dates_by_the_scan_when_present():
    p = load_profile("bsh-2014")
    d = choose_dating(lmp=date(2026, 3, 1), scan_on=date(2026, 5, 10), scan_crl_mm=45.0,
                      rule=p.get("dating.rule"), thresholds=[])
    assert d.method == "scan"
    # CRL 45 mm -> 78 days (Robinson & Fleming 1975 formula); EDD = scan day + (280 - 78) days
    assert d.edd == date(2026, 5, 10) + timedelta(days=280 - 78)


def test_an_agreed_edd_wins():
    d = choose_dating(lmp=date(2026, 3, 1), agreed_edd=date(2026, 12, 1), rule="acog-co700", thresholds=[])
    assert d.method == "edd" and d.edd == date(2026, 12, 1)
