"""Build a complete demo installation of one facility of the invented Selvara district.

``build_site(data_dir, site="clinic-a")`` writes config.toml (facility, protocol profile,
stocked products, demo accounts), the facility's demo signing key, the district trust list
(listing every demo facility, signed by the district's demo key) and the records of the
women in ``seed_demo.stories`` that the facility holds, through ``clinic.store.Store``.

Ids are uuid5 of the story key, so the same woman has the same ids at every site and in
every run: the district can merge the facilities' bundles and the hospital can import
cards without making duplicates. Times are relative to ``now``, so something is always due.

``build_site(..., site="district")`` makes the district installation (no records of its
own) and writes every facility's signed bundle to ``<data_dir>/demo-bundles/``.
"""
from __future__ import annotations

import json
import math
import shutil
import tempfile
import uuid
from collections import Counter
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta, timezone
from pathlib import Path
from typing import Any, Mapping
from zoneinfo import ZoneInfo

from clinic.care.calc import ug_to_iu
from clinic.records.values import parse_ga, utc_text
from seed_demo.sites import DISTRICT_NAME, FACILITY_SITES, SITE_DEFS, SITES, TIMEZONE, Site
from seed_demo.sites import site as site_def
from seed_demo.stories import STORIES, Story, When, stories_at

__all__ = ["SITES", "FACILITY_SITES", "build_site", "plan_site", "config_text", "DemoError", "record_id",
           "woman_id", "pregnancy_id", "earlier_pregnancy_id", "earlier_record_id", "pregnancy_ids"]

# Fixed namespace of every demo id (a random UUID chosen once for this demo).
NAMESPACE = uuid.UUID("6b1f0c9e-3d5a-4e27-9c41-8f2a7d3b5e10")
BUNDLES_DIR = "demo-bundles"
TRUST_FILE = "selvara-trust.cose"
TRUST_SEQ = 1


class DemoError(RuntimeError):
    """The demo cannot be built as asked; the message says what to do."""


def _uid(*parts: str) -> str:
    return str(uuid.uuid5(NAMESPACE, "/".join(parts)))


def woman_id(story_key: str) -> str:
    return _uid(story_key, "woman")


def pregnancy_id(story_key: str) -> str:
    return _uid(story_key, "pregnancy")


def record_id(story_key: str, step_index: int) -> str:
    return _uid(story_key, f"step-{step_index}")


def earlier_pregnancy_id(story_key: str) -> str:
    """The id of the story's earlier pregnancy (``Story.earlier``)."""
    return _uid(story_key, "earlier-pregnancy")


def earlier_record_id(story_key: str, step_index: int) -> str:
    return _uid(story_key, f"earlier-step-{step_index}")


def pregnancy_ids(story: Story) -> list[str]:
    """Every pregnancy of the story's woman: the earlier one (if any), then the story's own."""
    return ([earlier_pregnancy_id(story.key)] if story.earlier else []) + [pregnancy_id(story.key)]


# ---- time ---------------------------------------------------------------------------------

def _aware_now(now: datetime | None) -> datetime:
    if now is None:
        now = datetime.now(timezone.utc)
    if now.tzinfo is None:
        raise ValueError("now must be timezone-aware (e.g. datetime.now(timezone.utc))")
    return now.astimezone(timezone.utc).replace(microsecond=0)


class Clock:
    """Resolves the relative times of the stories against one ``now`` in the district's zone."""

    def __init__(self, now: datetime, tz: ZoneInfo):
        self.now = now
        self.tz = tz
        self.today = now.astimezone(tz).date()
        first_this = self.today.replace(day=1)
        self.last_month_start = (first_this - timedelta(days=1)).replace(day=1)

    def local(self, d: date, hour: int, minute: int = 0) -> datetime:
        return datetime.combine(d, time(hour, minute), tzinfo=self.tz).astimezone(timezone.utc)

    def local_date(self, t: datetime) -> date:
        return t.astimezone(self.tz).date()


@dataclass
class Planned:
    """One store call of the demo at one site: a create, a status amendment, or a copy of a
    record made at another facility (merged in as if imported from the woman's card)."""

    site: str  # where the record was made
    story: Story | None  # None for stock movements
    op: str  # "create" | "amend" | "copy"
    kind: str
    rid: str
    fields: dict[str, Any]
    at: datetime
    by_role: str
    woman_id: str | None = None
    pregnancy_id: str | None = None
    reason: str = ""
    seq: int = 0
    # For op "copy": the call as the other facility made it, and when.
    orig_op: str = ""
    orig_at: datetime | None = None


def _timeline(story: Story, clock: Clock) -> list[Planned]:
    """Every store call of one story, in the order it happened (her earlier pregnancy first)."""
    wid = woman_id(story.key)
    parts = []
    if story.earlier is not None:
        e = story.earlier
        parts.append(_pregnancy_timeline(story, clock, e.dating, e.steps, e.booked, earlier_pregnancy_id(story.key),
                                         lambda i: earlier_record_id(story.key, i),
                                         {"gravidity": e.gravidity, "parity": e.parity}))
    parts.append(_pregnancy_timeline(story, clock, story.dating, story.steps, story.booked, pregnancy_id(story.key),
                                     lambda i: record_id(story.key, i), dict(story.pregnancy_fields)))
    first_booked = min(booked for booked, _ in parts)
    out = [Planned(story.home, story, "create", "woman", wid, _woman_fields(story, clock), first_booked, "midwife")]
    for _, ops in parts:
        out += ops
    return out


def _pregnancy_timeline(story: Story, clock: Clock, dating, steps, booked: str, pid: str, rid_of,
                        extra_fields: dict) -> tuple[datetime, list[Planned]]:
    """(booked at, the store calls) of one pregnancy of the story's woman."""
    labels: dict[str, datetime] = {}
    ids: dict[str, str] = {}
    ga_text, anchor = dating
    anchor_ga = parse_ga(ga_text)

    def resolve(when: When) -> datetime:
        if when.base == "ago":
            return clock.now - timedelta(days=when.days, hours=when.hours)
        if when.base == "last-month":
            return clock.local(clock.last_month_start + timedelta(days=int(when.days) - 1), when.hour, when.minute)
        if when.base == "ga":
            return clock.local(lmp + timedelta(days=int(when.days)), when.hour, when.minute)
        if when.base == "after":
            if when.ref not in labels:
                raise DemoError(f"story {story.key}: after({when.ref!r}) names no earlier step")
            return labels[when.ref] + timedelta(days=when.days, hours=when.hours)
        raise DemoError(f"story {story.key}: unknown time base {when.base!r}")

    if anchor.base in ("ga", "after"):
        raise DemoError(f"story {story.key}: dating must be anchored to now or last month")
    lmp = clock.local_date(resolve(anchor)) - timedelta(days=anchor_ga)

    times = []
    for i, step in enumerate(steps):
        t = resolve(step.when)
        if t > clock.now:
            raise DemoError(f"story {story.key}: step {i} ({step.kind}) would be in the future "
                            f"({utc_text(t)} after now {utc_text(clock.now)}); anchor it with ago()")
        times.append(t)
        if step.label:
            labels[step.label] = t
            ids[step.label] = rid_of(i)

    booked_at = clock.local(lmp + timedelta(days=parse_ga(booked)), 9)
    if times:
        booked_at = min(booked_at, min(times) - timedelta(minutes=30))
    if booked_at > clock.now:
        booked_at = clock.now - timedelta(hours=1)
    wid = woman_id(story.key)
    fields = _pregnancy_fields(story, lmp, clock.local_date(booked_at))
    fields.update(extra_fields)
    out = [Planned(story.home, story, "create", "pregnancy", pid, fields, booked_at + timedelta(minutes=2),
                   "midwife", woman_id=wid)]
    for i, (step, t) in enumerate(zip(steps, times, strict=True)):
        where = step.site or story.home
        s = site_def(where)
        if step.kind == "status":
            out.append(Planned(where, story, "amend", "pregnancy", pid, dict(step.fields), t, step.by,
                               reason=_status_reason(step.fields.get("status"))))
            continue
        values = {}
        for k, v in step.fields.items():
            values[k] = _fill(v, story, s, t, lmp, ids, clock)
        values = {k: v for k, v in values.items() if v is not None}
        if step.kind == "dose":
            lot = s.lots.get(step.lot or "main")
            if lot is None:
                raise DemoError(f"story {story.key}: {s.name} stocks no {step.lot!r} lot")
            values.update(product=lot.product, lot=lot.lot,
                          lot_expiry=(clock.today + timedelta(days=lot.expires_in_days)).isoformat())
        out.append(Planned(where, story, "create", step.kind, rid_of(i), values, t, step.by,
                           woman_id=wid, pregnancy_id=pid))
    return booked_at, out


def _status_reason(status: str | None) -> str:
    return {"delivered": "birth recorded", "ended-early": "pregnancy ended (miscarriage)"}.get(
        status or "", "status updated")


def _fill(v: Any, story: Story, s: Site, t: datetime, lmp: date, ids: dict, clock: Clock) -> Any:
    if not isinstance(v, str) or not v.startswith("@"):
        return v
    if v == "@at":
        return utc_text(t)
    if v == "@date":
        return clock.local_date(t).isoformat()
    if v == "@ga":
        days = (clock.local_date(t) - lmp).days
        return days if 28 <= days <= 308 else None
    if v == "@lab":
        return s.lab or s.name
    if v == "@given_by":
        return s.account("midwife").display_name.split(" (")[0]
    if v.startswith("@step:"):
        label = v[len("@step:"):]
        if label not in ids:
            raise DemoError(f"story {story.key}: {v} names no earlier step")
        return ids[label]
    raise DemoError(f"story {story.key}: unknown placeholder {v}")


def _index(story: Story) -> int:
    return next(i for i, s in enumerate(STORIES) if s.key == story.key)


_PREFIX = {"clinic-a": "AMB", "clinic-b": "RUS", "clinic-c": "PEL", "hospital": "SRH"}


def _woman_fields(story: Story, clock: Clock) -> dict:
    i = _index(story)
    n = sum(1 for s in STORIES[:i + 1] if s.home == story.home)
    f = {"name": story.name, "village": story.village or site_def(story.home).name.split()[0],
         "phone": f"0700 000 {100 + i:03d}", "register_no": f"{_PREFIX[story.home]}-{n:03d}"}
    if i % 4 == 3:
        f["stated_age"] = story.age  # date of birth not known: the form takes the stated age
    else:
        born = clock.today.replace(year=clock.today.year - story.age, day=1) - timedelta(days=(i * 37) % 300)
        f["birth_date"] = born.isoformat()
    return f


def _pregnancy_fields(story: Story, lmp: date, booked_on: date) -> dict:
    f = {"booked_on": booked_on.isoformat(), "lmp": lmp.isoformat(), "gravidity": story.gravidity,
         "parity": story.parity, "status": "ongoing"}
    if story.multiple > 1:
        f["multiple"] = story.multiple
    return f


# ---- stock --------------------------------------------------------------------------------

def _stock_plan(s: Site, doses: list[Planned], clock: Clock) -> list[Planned]:
    """Received lots, a vial given for each dose, an expired lot discarded, a cold-chain break."""
    out = []
    fid = s.facility_id
    by_lot = {lot.lot: (key, lot) for key, lot in s.lots.items()}
    first_use = {}
    for d in doses:
        first_use[d.fields["lot"]] = min(first_use.get(d.fields["lot"], d.at), d.at)
    for _key, lot in s.lots.items():
        # Delivered before the first dose given from it (the stories reach back months).
        t = clock.now - timedelta(days=lot.received_days_ago)
        if lot.lot in first_use:
            t = min(t, first_use[lot.lot] - timedelta(days=14))
        out.append(Planned(s.key, None, "create", "stock", _uid("stock", fid, lot.lot, "received"), {
            "move": "received", "at": utc_text(t),
            "product": lot.product, "vial_iu": lot.vial_iu, "lot": lot.lot,
            "lot_expiry": (clock.today + timedelta(days=lot.expires_in_days)).isoformat(),
            "vials": lot.vials_received, "notes": "delivery from the district store"}, t, "midwife"))
    balance = Counter({lot.lot: lot.vials_received for lot in s.lots.values()})
    for d in doses:
        key, lot = by_lot[d.fields["lot"]]
        vials = max(1, math.ceil(_dose_iu(d.fields) / lot.vial_iu))
        balance[lot.lot] -= vials
        out.append(Planned(s.key, None, "create", "stock", _uid("stock", d.rid), {
            "move": "given", "at": d.fields["given_at"], "product": lot.product, "vial_iu": lot.vial_iu,
            "lot": lot.lot, "lot_expiry": d.fields["lot_expiry"], "vials": vials, "dose_id": d.rid},
            d.at + timedelta(minutes=1), "midwife"))
    if "expired" in s.lots:
        lot = s.lots["expired"]
        t = clock.now - timedelta(days=3)
        left = balance[lot.lot]
        if left > 0:
            out.append(Planned(s.key, None, "create", "stock", _uid("stock", fid, lot.lot, "discarded"), {
                "move": "discarded", "at": utc_text(t), "product": lot.product, "vial_iu": lot.vial_iu,
                "lot": lot.lot, "lot_expiry": (clock.today + timedelta(days=lot.expires_in_days)).isoformat(),
                "vials": left, "notes": "expired lot found in the fridge after the expired-lot alert"},
                t, "midwife"))
            balance[lot.lot] = 0
    lot = s.lots["main"]
    t = clock.now - timedelta(days=15)
    out.append(Planned(s.key, None, "create", "stock", _uid("stock", fid, lot.lot, "cold-chain"), {
        "move": "cold-chain-break", "at": utc_text(t), "product": lot.product, "vial_iu": lot.vial_iu,
        "lot": lot.lot, "lot_expiry": (clock.today + timedelta(days=lot.expires_in_days)).isoformat(),
        "vials": 2, "notes": "fridge above 8 °C for 9 hours during a power cut; vials set aside"},
        t, "midwife"))
    _check_balances(s, out)
    return out


def _check_balances(s: Site, moves: list[Planned]) -> None:
    """No lot may go below zero at any moment (the stories and the lots must agree)."""
    sign = {"received": 1, "given": -1, "discarded": -1, "cold-chain-break": -1}
    balance: Counter = Counter()
    for p in sorted(moves, key=lambda p: p.fields["at"]):
        balance[p.fields["lot"]] += sign[p.fields["move"]] * p.fields["vials"]
        if balance[p.fields["lot"]] < 0:
            raise DemoError(f"{s.name}: lot {p.fields['lot']} would go below zero on {p.fields['at']}; "
                            f"receive more vials or earlier in seed_demo/sites.py")


def _dose_iu(fields: dict) -> float:
    amount = float(fields["amount"])
    return ug_to_iu(amount) if fields["unit"] == "ug" else amount


# ---- config.toml --------------------------------------------------------------------------

def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    s = str(v).replace("\\", "\\\\").replace('"', '\\"')
    return f'"{s}"'


# The demo passwords are published (README, the demo command prints them, the sign-in page
# shows them), so their hashes protect nothing: a cheap PBKDF2 keeps building a demo quick,
# and the first sign-in re-hashes it as Argon2id like any older hash.
DEMO_HASH_METHOD = "pbkdf2:sha256:20000"
# First line of every demo config.toml: `build_site(force=True)` deletes only folders marked so.
DEMO_MARKER = "# Demo installation of the invented Selvara district (seed_demo). Not a real facility."


def config_text(s: Site) -> str:
    """config.toml of a demo site (its accounts are written by ``_write_accounts``)."""
    lines = [
        DEMO_MARKER,
        "[facility]",
        f"id = {_toml_value(s.facility_id)}",
        f"name = {_toml_value(s.name)}",
        f"kind = {_toml_value(s.kind)}",
        f"phone = {_toml_value(s.phone)}",
        f"district = {_toml_value(DISTRICT_NAME)}",
        f"timezone = {_toml_value(TIMEZONE)}",
        "",
        "[care]",
        f"# {s.regimen_note}",
        f"profile = {_toml_value(s.profile)}",
        "rhd_negative_frequency = 0.05",
        "maternal_blood_volume_ml = 5000",
        "",
    ]
    if s.overrides:
        lines.append("[care.overrides]")
        for k, v in s.overrides.items():
            lines.append(f"{_toml_value(k)} = {_toml_value(v)}")
        lines.append("")
    if s.products:
        lines.append("[stock]")
        lines.append("products = [")
        for name, vial, routes in s.products:
            lines.append(f"  {{ name = {_toml_value(name)}, vial_iu = {vial}, routes = {_toml_value(list(routes))} }},")
        lines.append("]")
        lines.append("")
    lines += ["[backup]", "keep = 14", "",
              "# The demo sign-ins are in users.json (demo accounts: they sign in only beside the DEMO file).", ""]
    return "\n".join(lines)


def _write_accounts(data_dir: Path, s: Site, clock: Clock) -> None:
    """users.json with the site's demo accounts, and the DEMO marker that lets them sign in.

    The marker holds the published sign-ins, so the sign-in page can show them."""
    from werkzeug.security import generate_password_hash

    from clinic.accounts.users import DEMO_MARKER as DEMO_FILE
    from clinic.accounts.users import UserStore

    marker = {"text": f"{s.name} of the invented {DISTRICT_NAME}: invented people and places only.",
              "accounts": [[a.username, a.password, a.role] for a in s.staff]}
    (data_dir / DEMO_FILE).write_text(json.dumps(marker, ensure_ascii=False, indent=1) + "\n", encoding="utf-8")
    users = UserStore(data_dir)
    for a in s.staff:
        # Re-made as Argon2id at the first sign-in (users.UserStore.authenticate).
        users.add(a.username, a.role, display_name=a.display_name, by="seed_demo", now=clock.now.timestamp(),
                  demo=True, password_hash=generate_password_hash(a.password, method=DEMO_HASH_METHOD))


# ---- keys and trust -----------------------------------------------------------------------

def _trust_list_bytes(issued: date) -> tuple[bytes, str]:
    """The district's signed list of every demo facility, and the district key's fingerprint."""
    from clinic.signing.keys import SigningKey
    from clinic.signing.trust import build_trust_list

    entries = []
    for key in SITES:
        s = SITE_DEFS[key]
        k = SigningKey.from_seed(s.facility_id, s.key_seed)
        entries.append({"facility_id": s.facility_id, "name": s.name, "kind": s.kind, "phone": s.phone,
                        "key": k.public_key_b64})
    district = SITE_DEFS["district"]
    signer = SigningKey.from_seed(district.facility_id, district.key_seed)
    data = build_trust_list(entries, signer, district_name=district.name, seq=TRUST_SEQ, issued=issued)
    return data, signer.fingerprint


def _install_keys(data_dir: Path, s: Site, clock: Clock) -> str:
    from clinic.signing.keys import ensure_facility_key
    from clinic.signing.trust import import_trust_list

    ensure_facility_key(data_dir, s.facility_id, seed=s.key_seed)
    data, fingerprint = _trust_list_bytes(clock.today)
    import_trust_list(data_dir, data, expected_fingerprint=fingerprint, today=clock.today)
    return fingerprint


# ---- writing ------------------------------------------------------------------------------

def _prepare_dir(data_dir: Path, force: bool) -> None:
    if data_dir.exists() and not data_dir.is_dir():
        raise DemoError(f"{data_dir} is a file, not a directory")
    if data_dir.is_dir() and any(data_dir.iterdir()):
        if not force:
            raise DemoError(f"{data_dir} is not empty; choose another directory or pass force=True "
                            f"(rhledger demo --force) to replace it with fresh demo data")
        config = data_dir / "config.toml"
        if not config.exists():
            raise DemoError(f"{data_dir} holds files but no config.toml: it does not look like an rhledger "
                            f"data directory, so it is not deleted; choose an empty directory")
        if not _is_demo_config(config):
            # A real installation: its records and its facility key must survive any mistake.
            raise DemoError(f"{data_dir} holds an installation that the demo did not write (its config.toml "
                            f"lacks the demo's first line): it is never deleted, not even with force; choose "
                            f"another directory for the demo")
        shutil.rmtree(data_dir)
    data_dir.mkdir(parents=True, exist_ok=True)


def _is_demo_config(path: Path) -> bool:
    try:
        with open(path, encoding="utf-8") as f:
            return f.readline().rstrip("\n") == DEMO_MARKER
    except (OSError, UnicodeDecodeError):
        return False


def _write_config(data_dir: Path, s: Site) -> None:
    (data_dir / "config.toml").write_text(config_text(s), encoding="utf-8")


def plan_site(site: str, now: datetime | None = None) -> list[Planned]:
    """Every store call that builds ``site``, with copies marked ``op="copy"`` (for tests and tools)."""
    s = site_def(site)
    clock = Clock(_aware_now(now), ZoneInfo(TIMEZONE))
    return _plan(s, clock)


def _plan(s: Site, clock: Clock) -> list[Planned]:
    ops: list[Planned] = []
    for story in stories_at(s.key):
        tl = _timeline(story, clock)
        own = [p for p in tl if p.site == s.key]
        first_own = min((p.at for p in own), default=None)
        if s.key != story.home:
            if first_own is None:
                continue
            for p in tl:
                if p.site != s.key and p.at < first_own:
                    ops.append(Planned(p.site, story, "copy", p.kind, p.rid, p.fields, first_own - timedelta(minutes=5),
                                       p.by_role, p.woman_id, p.pregnancy_id, p.reason,
                                       orig_op=p.op, orig_at=p.at))
        ops += own
    doses = [p for p in ops if p.op == "create" and p.kind == "dose"]
    if s.lots:
        ops += _stock_plan(s, doses, clock)
    for i, p in enumerate(ops):
        p.seq = i
    kind_order = {"woman": 0, "pregnancy": 1}
    ops.sort(key=lambda p: (p.at, kind_order.get(p.kind, 2), p.seq))
    for i, p in enumerate(ops):
        p.seq = i
    return ops


def _open_store(data_dir: Path):
    from clinic.store import Store
    return Store(data_dir)


def _apply(store, s: Site, p: Planned, clock: Clock) -> None:
    when = min(p.at + timedelta(minutes=5), clock.now)
    by = s.account(p.by_role).username
    if p.op == "amend":
        store.amend(p.rid, p.fields, by=by, reason=p.reason, now=when)
        return
    store.create(p.kind, p.fields, by=by, facility=s.facility_id, woman_id=p.woman_id,
                 pregnancy_id=p.pregnancy_id, record_id=p.rid, now=when)


def _copy_records(store, copies: list[Planned], clock: Clock, scratch_root: Path) -> int:
    """Records made elsewhere, as the target holds them after importing the woman's card.

    Each record is made by the other facility's own rules in a scratch store (so it carries
    that facility's envelope and amendments), then merged into the target with
    Store.merge_foreign, marked as coming from her card.
    """
    stores: dict[str, Any] = {}
    for p in sorted(copies, key=lambda p: (p.orig_at, p.seq)):
        if p.site not in stores:
            d = scratch_root / p.site
            d.mkdir(parents=True)
            src = site_def(p.site)
            _write_config(d, src)
            stores[p.site] = _open_store(d)
        original = Planned(p.site, p.story, p.orig_op, p.kind, p.rid, p.fields, p.orig_at, p.by_role,
                           p.woman_id, p.pregnancy_id, p.reason)
        _apply(stores[p.site], site_def(p.site), original, clock)
    n = 0
    merged: set[str] = set()
    for p in sorted(copies, key=lambda p: p.seq):
        if p.rid in merged:
            continue  # an amendment of a record already merged: the stored record carries it
        merged.add(p.rid)
        rec = dict(stores[p.site].get(p.rid))
        # As the card import records it: the issuing facility and the card's issue number.
        rec["origin"] = {"via": "card", "facility": site_def(p.site).facility_id, "issue": 1}
        store.merge_foreign(rec, by="import:card", now=min(p.at + timedelta(minutes=5), clock.now))
        n += 1
    for st in stores.values():
        _close(st)
    return n


def _close(store) -> None:
    closer = getattr(store, "close", None)
    if callable(closer):
        closer()


def build_site(data_dir, site: str = "clinic-a", now: datetime | None = None, force: bool = False, *,
               bundle_sources: Mapping[str, Path] | None = None) -> dict:
    """Write a complete demo installation of ``site`` into ``data_dir`` and return a summary.

    The summary: site, facility_id, facility_name, kind, profile, data_dir, now, counts,
    accounts [(username, password, role)], notes (what to look at), and for the district
    the bundles written.

    For the district, each facility is built in a scratch folder and its bundle exported;
    ``bundle_sources`` (site -> data_dir of facility sites already built with the same
    ``now``) exports from those instead, which is quicker when they exist anyway.
    """
    if site not in SITE_DEFS:
        raise DemoError(f"no demo site {site!r}; choose one of: {', '.join(SITES)}")
    s = SITE_DEFS[site]
    data_dir = Path(data_dir)
    clock = Clock(_aware_now(now), ZoneInfo(TIMEZONE))
    _prepare_dir(data_dir, force)
    _write_config(data_dir, s)
    _write_accounts(data_dir, s, clock)
    fingerprint = _install_keys(data_dir, s, clock)
    summary: dict[str, Any] = {
        "site": s.key, "facility_id": s.facility_id, "facility_name": s.name, "kind": s.kind,
        "profile": s.profile, "profile_overrides": dict(s.overrides), "data_dir": str(data_dir),
        "now": utc_text(clock.now), "district_fingerprint": fingerprint,
        "accounts": [(a.username, a.password, a.role) for a in s.staff],
        "url_path": "/district/" if s.kind == "district" else "/",
    }
    if s.kind == "district":
        summary["counts"] = {"women": 0, "pregnancies": 0, "entries": 0, "stock": 0, "copies": 0}
        summary["bundles"] = _write_bundles(data_dir / BUNDLES_DIR, clock, bundle_sources or {})
        summary["notes"] = _district_notes(summary)
        return summary

    ops = _plan(s, clock)
    store = _open_store(data_dir)
    counts: Counter = Counter()
    copied = 0
    imported: set[tuple[str, str]] = set()
    with tempfile.TemporaryDirectory(prefix="rhledger-demo-") as scratch:
        for p in ops:
            if p.op == "copy":
                # A card import at her first visit: every copy of her from that facility at once.
                if (p.story.key, p.site) not in imported:
                    imported.add((p.story.key, p.site))
                    group = [c for c in ops if c.op == "copy" and c.story is p.story and c.site == p.site]
                    copied += _copy_records(store, group, clock, Path(scratch) / f"{p.story.key}-{p.site}")
                continue
            _apply(store, s, p, clock)
            if p.op == "create":
                counts[p.kind] += 1
    _close(store)
    summary["counts"] = {
        "women": counts["woman"], "pregnancies": counts["pregnancy"],
        "entries": sum(v for k, v in counts.items() if k not in ("woman", "pregnancy", "stock")),
        "stock": counts["stock"], "copies": copied, "by_kind": dict(sorted(counts.items())),
    }
    summary["notes"] = _site_notes(s, summary)
    return summary


# ---- district -----------------------------------------------------------------------------

def _write_bundles(out_dir: Path, clock: Clock, sources: Mapping[str, Path]) -> list[dict]:
    """Export each facility's signed bundle to ``out_dir`` (built in scratch folders unless given)."""
    try:
        from clinic.reports.bundle import export_bundle
    except ImportError as e:  # the reports package is not there in this checkout
        raise DemoError(f"cannot write the demo bundles: clinic.reports.bundle is missing ({e})") from None
    unknown = set(sources) - set(FACILITY_SITES)
    if unknown:
        raise DemoError(f"bundle_sources names {', '.join(sorted(unknown))}; facility sites are "
                        f"{', '.join(FACILITY_SITES)}")
    out_dir.mkdir(parents=True, exist_ok=True)
    data, _ = _trust_list_bytes(clock.today)
    (out_dir / TRUST_FILE).write_bytes(data)
    written = []
    with tempfile.TemporaryDirectory(prefix="rhledger-demo-bundles-") as tmp:
        for key in FACILITY_SITES:
            s = SITE_DEFS[key]
            if key in sources:
                d = Path(sources[key])
                _check_source(d, s)
            else:
                d = Path(tmp) / key
                build_site(d, key, now=clock.now)
            store = _open_store(d)
            women = sum(1 for w in store.iter_records(kind="woman") if w["facility"] == s.facility_id)
            out = out_dir / f"{s.facility_id}.rhlb"
            # An explicit "since" exports everything and leaves the facility's export ledger alone.
            res = export_bundle(store, d, facility=s.facility_id, out=out, since="1900-01-01", now=clock.now)
            _close(store)
            written.append({"site": key, "facility_id": s.facility_id, "file": str(out),
                            "records": res.count, "women": women})
    return written


def _check_source(d: Path, s: Site) -> None:
    from clinic.config import ConfigError, load_settings

    try:
        fid = load_settings(d).facility_id
    except ConfigError as e:
        raise DemoError(f"bundle source for {s.key}: {e}") from None
    if fid != s.facility_id:
        raise DemoError(f"bundle source {d} is facility {fid}, not {s.facility_id} ({s.key})")


# ---- notes --------------------------------------------------------------------------------

def _site_notes(s: Site, summary: dict) -> list[str]:
    """What to look at: one line per woman worth showing (the RhD-positive bookings in one)."""
    notes = [f"{s.name} ({s.facility_id}), {DISTRICT_NAME}: invented demo data; profile {s.profile}"
             + (f" with overrides {dict(s.overrides)}" if s.overrides else "")]
    positives = 0
    for story in stories_at(s.key):
        if story.key.split("-")[1] == "pos":
            positives += 1
            continue
        where = "" if story.home == s.key else f" [her records from {site_def(story.home).name} came with her card]"
        notes.append(f"{story.name} ({story.key}){where}: {story.shows}")
    if positives:
        notes.append(f"{positives} RhD-positive bookings: nothing to give")
    return notes


def _district_notes(summary: dict) -> list[str]:
    s = SITE_DEFS["district"]
    notes = [f"{s.name} ({s.facility_id}): invented demo data, no records of its own"]
    for b in summary.get("bundles", []):
        notes.append(f"Bundle to import: {b['file']} ({b['records']} records from {b['facility_id']})")
    notes.append("Import them all (district page, Import) to see last month's coverage report and follow-up list")
    a, b = SITE_DEFS["clinic-a"], SITE_DEFS["clinic-b"]
    notes.append(f"Then Supply: {b.name} runs out of 1500 IU vials within weeks; {a.name}'s lot "
                 f"{a.lots['short-dated'].lot} would expire unused, and the suggested transfer to {b.name} saves it")
    return notes
