"""Every demo site is a complete installation: settings, demo sign-ins, key, trust list, records."""
from __future__ import annotations

import pytest

from seed_demo.scenario import FACILITY_SITES, SITES
from seed_demo.sites import SITE_DEFS
from seed_demo.stories import stories_at


@pytest.mark.parametrize("site", SITES)
def test_config_parses_and_names_the_facility(site, demo, demo_dirs):
    from clinic.config import load_settings

    s = load_settings(demo_dirs[site])
    assert s.facility_id == demo[site]["facility_id"] == SITE_DEFS[site].facility_id
    assert s.facility_name == demo[site]["facility_name"]
    assert s.facility_kind == SITE_DEFS[site].kind
    assert s.timezone == "Africa/Nairobi"
    assert s.district == "Selvara District"


@pytest.mark.parametrize("site", SITES)
def test_demo_passwords_sign_in(site, demo, demo_dirs):
    from clinic.accounts.passwords import verify
    from clinic.accounts.users import UserStore, is_demo_dir

    users = UserStore(demo_dirs[site])  # accounts live in users.json; the demo marks its folder
    assert is_demo_dir(demo_dirs[site])
    assert demo[site]["accounts"], "a demo site needs at least one sign-in"
    for username, password, role in demo[site]["accounts"]:
        acct = users.get(username)
        assert acct is not None and acct.role == role and acct.demo
        assert verify(acct.password_hash, password)[0]
    first = users.get(demo[site]["accounts"][0][0])
    assert not verify(first.password_hash, demo[site]["accounts"][0][1] + "x")[0]


def test_clinics_follow_different_protocols(demo_dirs):
    from clinic.care_inputs import care_inputs
    from clinic.config import load_settings

    seen = {}
    for site in ("clinic-a", "clinic-b", "clinic-c"):
        s = load_settings(demo_dirs[site])
        profile, _ = care_inputs(s)
        seen[site] = (profile.id, profile.regimen)
    assert seen == {"clinic-a": ("bsh-2014", "single"),      # bsh-2014 with a local override
                    "clinic-b": ("acog-2017", "single"),
                    "clinic-c": ("bsh-2014", "two-dose")}


def test_district_has_a_district_officer(demo):
    roles = {role for _, _, role in demo["district"]["accounts"]}
    assert "district-officer" in roles


@pytest.mark.parametrize("site", SITES)
def test_trust_list_lists_every_demo_facility(site, demo_dirs):
    from clinic.signing.trust import load_trust

    tl = load_trust(demo_dirs[site])
    listed = {e.facility_id for e in tl.entries}
    assert {s.facility_id for s in SITE_DEFS.values()} <= listed
    assert tl.district_id == SITE_DEFS["district"].facility_id


@pytest.mark.parametrize("site", SITES)
def test_facility_key_is_the_seeded_demo_key(site, demo_dirs):
    from clinic.signing.keys import SigningKey, load_signing_key

    d = SITE_DEFS[site]
    key = load_signing_key(demo_dirs[site])
    assert key.facility_id == d.facility_id
    assert key.public_raw == SigningKey.from_seed(d.facility_id, d.key_seed).public_raw


@pytest.mark.parametrize("site", FACILITY_SITES)
def test_site_holds_the_women_of_its_stories(site, demo, demo_stores):
    from seed_demo.scenario import pregnancy_ids

    store = demo_stores[site]
    held = {p["id"] for p in store.pregnancies()}
    assert held == {pid for s in stories_at(site) if site == s.home or _seen_at(s, site) for pid in pregnancy_ids(s)}
    c = demo[site]["counts"]
    assert c["women"] + c["copies"] >= len({p["woman_id"] for p in store.pregnancies()})  # a woman may have two
    assert demo[site]["notes"], "the summary has notes on what to look at"


def _seen_at(story, site):
    return any(step.site == site for step in story.steps)


def test_three_clinics_hold_about_sixty_women_between_them(demo):
    women = sum(demo[s]["counts"]["women"] for s in FACILITY_SITES)
    assert 55 <= women <= 70
    for site in ("clinic-a", "clinic-b", "clinic-c"):
        assert demo[site]["counts"]["women"] >= 15
