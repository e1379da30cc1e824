"""Commands for the patient-held card, facility keys and the district trust list.

    rhledger card PREGNANCY --out card.pdf [--png card.png] [--sheet sheet.pdf] [--referral note.pdf] [--payload]
    rhledger read-card --text PAYLOAD | --image FILE [--json] [--import]
    rhledger card-code CODE
    rhledger keys show | rotate
    rhledger trust build --facilities FILE --out trust.cose | import FILE | list | show FILE
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

import click

from clinic.cli.common import clean_errors, data_option, emit_json, fail, open_store, resolve_data, write_file

# Exit status of read-card by trust state.
EXIT_BY_TRUST = {"trusted": 0, "unknown-issuer": 0, "altered": 2, "unreadable": 3}


def _errors():
    from clinic.card.importing import CardImportError
    from clinic.card.issue import CardIssueError
    from clinic.card.payload import PayloadError
    from clinic.card.scan import ImageReadError
    from clinic.config import ConfigError
    from clinic.printing.errors import PrintError
    from clinic.records.validate import ValidationError
    from clinic.signing.errors import SigningError
    from clinic.store import StoreError
    return (CardImportError, CardIssueError, PayloadError, PrintError, ImageReadError, ConfigError,
            ValidationError, SigningError, StoreError, OSError)


def handled(fn):
    """clean_errors over the card, signing, store and file errors (resolved at call time)."""
    import functools

    @functools.wraps(fn)
    def wrapper(*a, **kw):
        return clean_errors(*_errors())(fn)(*a, **kw)
    return wrapper


def _open(data):
    from clinic.config import load_settings
    d = resolve_data(data)
    settings = load_settings(d)
    return d, settings, open_store(d, settings)


def _find_pregnancy(store, ref: str) -> str:
    """A pregnancy by full id or by a unique prefix of at least 6 characters."""
    ref = ref.strip().lower()
    p = store.get(ref)
    if p is not None and p["kind"] == "pregnancy":
        return p["id"]
    if len(ref) < 6:
        fail(f"no pregnancy {ref!r}: give the full id or at least its first 6 characters "
             f"(see `rhledger list`)")
    hits = [p["id"] for p in store.pregnancies() if p["id"].lower().startswith(ref)]
    if not hits:
        fail(f"no pregnancy starts with {ref!r}; see `rhledger list`")
    if len(hits) > 1:
        fail(f"{len(hits)} pregnancies start with {ref!r}: give more characters")
    return hits[0]


@click.command("card")
@click.argument("pregnancy")
@click.option("--out", type=click.Path(dir_okay=False, path_type=Path), help="Write the pocket card PDF here.")
@click.option("--png", "png", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the card as a PNG (front above back) for a phone.")
@click.option("--sheet", type=click.Path(dir_okay=False, path_type=Path),
              help="Write four copies on A4 with cut marks (backs on page 2, for duplex printing).")
@click.option("--referral", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the referral note PDF (uses the pregnancy's latest referral record).")
@click.option("--payload", is_flag=True, help="Print the QR text (the signed card code) on standard output.")
@click.option("--json", "as_json", is_flag=True, help="Print the issue facts as JSON.")
@click.option("--dpi", type=click.IntRange(72, 600), default=200, show_default=True, help="Resolution of --png.")
@data_option
@handled
def card_cmd(pregnancy, out, png, sheet, referral, payload, as_json, dpi, data):
    """Issue the patient-held card of PREGNANCY (its id, or the first 6+ characters of it).

    Each card carries an issue number; printing after a visit makes a new issue that replaces
    older cards, printing again with nothing changed gives the same issue. The card shows the
    caution: decision support only; confirm doses against the product label and local protocol.
    """
    from clinic.card import printing
    from clinic.card.issue import issue_card
    if not any((out, png, sheet, referral, payload, as_json)):
        fail("say what to make: --out card.pdf, --png card.png, --sheet sheet.pdf, --referral note.pdf, "
             "--payload or --json")
    d, settings, store = _open(data)
    pid = _find_pregnancy(store, pregnancy)
    ic = issue_card(d, store, settings, pid)
    written = []
    if out:
        write_file(out, printing.card_pdf(ic.view))
        written.append(str(out))
    if png:
        write_file(png, printing.card_png(ic.view, dpi=dpi))
        written.append(str(png))
    if sheet:
        write_file(sheet, printing.sheet_pdf([ic.view] * 4))
        written.append(str(sheet))
    if referral:
        _, _, entries = store.history(pid)
        refs = sorted((e for e in entries if e["kind"] == "referral" and not e.get("voided")),
                      key=lambda r: (r["referred_on"], r["created_at"]))
        if not refs:
            fail("this pregnancy has no referral record: record the referral (to whom, the reason and the "
                 "question asked) first, then print the note")
        r = refs[-1]
        from clinic.card.view import show_date
        write_file(referral, printing.referral_pdf(ic.view, {"to": r["to_facility"], "reason": r["reason"],
                                                             "question": r.get("question", ""),
                                                             "date": show_date(r["referred_on"])}))
        written.append(str(referral))
    facts = {"pregnancy_id": pid, "issue": ic.issue, "issued_at": ic.issued_at, "card_code": ic.card.code,
             "reused": ic.reused, "qr_version": ic.card.qr_version, "qr_ec": ic.card.qr_ec,
             "chars": len(ic.card.text), "entries": ic.card.included, "omitted": ic.card.omitted,
             "written": written}
    if as_json:
        emit_json(facts | ({"payload": ic.card.text} if payload else {}))
        return
    if payload:
        click.echo(ic.card.text)
    for w in written:
        click.echo(f"Wrote {w}", err=payload)
    click.echo(f"Card issue {ic.issue}{' (unchanged since last printed)' if ic.reused else ''}, "
               f"card code {ic.card.code}, QR version {ic.card.qr_version}-{ic.card.qr_ec}"
               + (f"; {ic.card.omitted} older entries left off the QR" if ic.card.omitted else ""), err=payload)


@click.command("read-card")
@click.option("--text", "text", help="The card code as typed or scanned ('-' reads standard input).")
@click.option("--image", type=click.Path(exists=True, dir_okay=False, path_type=Path),
              help="A photo or scan of the card (PNG or JPEG).")
@click.option("--json", "as_json", is_flag=True,
              help="Print the decoded history and the trust state (key 'trust') as JSON.")
@click.option("--import", "do_import", is_flag=True, help="Take the history into this facility's store.")
@click.option("--woman", "woman_id", help="With --import: the local woman the card's history belongs to.")
@click.option("--new-woman", is_flag=True, help="With --import: she is not registered here (skip the duplicate check).")
@click.option("--accept-unknown-issuer", is_flag=True,
              help="With --import: import even though the issuer is not in the trust list.")
@data_option
@handled
def read_card_cmd(text, image, as_json, do_import, woman_id, new_woman, accept_unknown_issuer, data):
    """Read a card code and say whether to trust it.

    Trust states: trusted; unknown-issuer (readable, issuer not in the trust list: treat like an
    unsigned paper record); altered (the signature fails: do not rely on it); unreadable.
    Exit status: 0 trusted or unknown-issuer, 2 altered, 3 unreadable.
    """
    from clinic.card.codec import Reading, read_card
    from clinic.card.scan import ImageReadError, qr_texts
    from clinic.signing.trust import load_trust
    if bool(text) == bool(image):
        fail("give exactly one of --text PAYLOAD or --image FILE")
    d = resolve_data(data)
    trust = load_trust(d)
    if image:
        try:
            texts = qr_texts(image.read_bytes())
            reading = read_card(texts[0], trust, via="image")
        except ImageReadError as e:
            reading = Reading("unreadable", str(e), "image", stage="image")
    else:
        if text == "-":
            text = sys.stdin.read()
        reading = read_card(text, trust, via="text")
    result = reading.to_dict()
    if do_import:
        from clinic.card.importing import import_reading
        from clinic.config import load_settings
        if not reading.ok:
            _show(reading, as_json, result)
            sys.exit(EXIT_BY_TRUST[reading.trust])
        store = open_store(d, load_settings(d))
        imp = import_reading(store, reading, data_dir=d, woman_id=woman_id, new_woman=new_woman,
                             accept_unknown_issuer=accept_unknown_issuer)
        result["import"] = imp.to_dict()
    _show(reading, as_json, result)
    sys.exit(EXIT_BY_TRUST[reading.trust])


def _show(reading, as_json, result):
    if as_json:
        emit_json(result)
        return
    click.echo(f"{reading.headline.upper()}")
    click.echo(f"  why: {reading.reason}")
    click.echo(f"  what to do: {reading.advice}")
    c = reading.content
    if c is not None:
        w = c.woman
        click.echo(f"  card: issue {c.issue} of {c.issuer_id} ({c.issuer_name}, {c.issuer_phone}), issued "
                   f"{c.issued_at[:10]}, card code {reading.code}")
        click.echo(f"  woman: {w.get('name')}, born {w.get('birth_date') or ('age ' + str(w.get('stated_age')))}, "
                   f"reg. {w.get('register_no') or '-'}")
        kinds = {}
        for e in c.entries:
            kinds[e["kind"]] = kinds.get(e["kind"], 0) + 1
        click.echo("  entries: " + ", ".join(f"{n} {k}" for k, n in sorted(kinds.items())))
        if c.omitted:
            click.echo(f"  {c.omitted} older entries were left off the QR code; ask the issuing facility")
    if "import" in result:
        imp = result["import"]
        click.echo("  imported: " + ", ".join(f"{n} {k}" for k, n in sorted(imp["counts"].items())))


@click.command("card-code")
@click.argument("code")
@data_option
@handled
def card_code_cmd(code, data):
    """Look up a card code read over the phone among the cards issued here."""
    from clinic.card.issue import find_issue_by_code
    hit = find_issue_by_code(resolve_data(data), code)
    if hit is None:
        fail(f"no card with code {code} was issued here")
    emit_json(hit)


@click.group("keys")
def keys_group():
    """This facility's signing key (Ed25519): show its fingerprint, or rotate it."""


@keys_group.command("show")
@click.option("--json", "as_json", is_flag=True,
              help="Print the public key as a facilities-file entry, to send to the district.")
@data_option
@handled
def keys_show(as_json, data):
    """Show the public key, its fingerprint and retired keys. The private key is never shown."""
    from clinic.config import load_settings
    from clinic.signing.keys import current_key_info, retired_keys
    d = resolve_data(data)
    cur = current_key_info(d)
    old = retired_keys(d)
    if as_json:
        s = load_settings(d)
        emit_json({"facility_id": cur.facility_id, "name": s.facility_name, "kind": s.facility_kind,
                   "phone": s.facility_phone,
                   "keys": [{"kid": k.kid_hex, "key": k.public_key_b64, "valid_from": k.valid_from,
                             "valid_to": k.valid_to} for k in [*old, cur]]})
        return
    click.echo(f"Facility {cur.facility_id}")
    click.echo(f"  fingerprint {cur.fingerprint}  (kid {cur.kid_hex}, since {cur.valid_from})")
    for k in old:
        click.echo(f"  retired     {k.fingerprint}  (kid {k.kid_hex}, {k.valid_from} to {k.valid_to})")


@keys_group.command("rotate")
@click.option("--yes", is_flag=True, help="Do not ask for confirmation.")
@data_option
@handled
def keys_rotate(yes, data):
    """Make a new key; the old public key is kept so cards already printed stay verifiable."""
    from clinic.signing.keys import rotate_facility_key
    if not yes:
        click.confirm("Make a new signing key? Send its fingerprint to the district afterwards", abort=True)
    info = rotate_facility_key(resolve_data(data))
    click.echo(f"New key fingerprint: {info.fingerprint}")
    click.echo("Send `rhledger keys show --json` to the district so the next trust list carries the new key.")


@click.group("trust")
def trust_group():
    """The district trust list: build it (district), import it, list it."""


@trust_group.command("build")
@click.option("--facilities", "facilities_file", required=True,
              type=click.Path(exists=True, dir_okay=False, path_type=Path),
              help="JSON list of facilities, each as `rhledger keys show --json` prints it.")
@click.option("--out", required=True, type=click.Path(dir_okay=False, path_type=Path),
              help="Where to write trust.cose.")
@click.option("--seq", type=int, default=None, help="List number (default: the current time in seconds).")
@data_option
@handled
def trust_build(facilities_file, out, seq, data):
    """Sign a trust list with this (district) installation's key."""
    from clinic.config import load_settings
    from clinic.signing.keys import load_signing_key
    from clinic.signing.trust import build_trust_list, own_entry, read_trust_file
    d = resolve_data(data)
    settings = load_settings(d)
    if settings.facility_kind != "district":
        fail(f"this installation is a {settings.facility_kind}; trust lists are built by the district installation")
    try:
        entries = json.loads(facilities_file.read_text(encoding="utf-8"))
    except ValueError as e:
        fail(f"{facilities_file} is not JSON: {e}")
    if isinstance(entries, dict):
        entries = [entries]
    if not isinstance(entries, list):
        fail(f"{facilities_file} must hold a JSON list of facilities")
    me = own_entry(d)
    if not any(isinstance(e, dict) and e.get("facility_id") == me.facility_id for e in entries):
        entries.append(me)
    blob = build_trust_list(entries, load_signing_key(d), district_name=settings.facility_name, seq=seq)
    write_file(out, blob)
    tl, _, key = read_trust_file(blob)
    click.echo(f"Wrote {out}: {len(tl.entries)} facilities, list number {tl.seq}")
    click.echo(f"District key fingerprint (installations confirm it on first import): {key.fingerprint}")


@trust_group.command("import")
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--fingerprint", help="The district key's fingerprint, confirmed with the district (first import).")
@data_option
@handled
def trust_import(file, fingerprint, data):
    """Import the district's trust list. The first time, confirm the district key's fingerprint."""
    from clinic.signing.errors import DistrictKeyUnconfirmed
    from clinic.signing.trust import import_trust_list
    d = resolve_data(data)
    blob = file.read_bytes()
    try:
        got = import_trust_list(d, blob, expected_fingerprint=fingerprint)
    except DistrictKeyUnconfirmed as e:
        if not sys.stdin.isatty():
            fail(str(e))
        click.echo(f"First trust list for this installation: district {e.district_id}.")
        click.echo(f"Its key fingerprint is  {e.fingerprint}")
        if not click.confirm("Has the district officer confirmed this fingerprint to you (by phone or in person)?"):
            fail("not imported")
        got = import_trust_list(d, blob, expected_fingerprint=e.fingerprint)
    state = "unchanged (already installed)" if got.unchanged else "imported"
    click.echo(f"Trust list {got.seq} of {got.district_name} ({got.district_id}) {state}: "
               f"{got.facilities} facilities; district key {got.fingerprint}")


@trust_group.command("list")
@click.option("--json", "as_json", is_flag=True, help="Print as JSON.")
@data_option
@handled
def trust_list(as_json, data):
    """The facilities whose cards this installation trusts, with key validity dates."""
    from clinic.signing.trust import trust_info
    info = trust_info(resolve_data(data))
    if as_json:
        emit_json(info)
        return
    if info["district_id"]:
        click.echo(f"Trust list {info['seq']} of {info['district_name']} ({info['district_id']}), issued "
                   f"{info['issued']}; district key {info['district_fingerprint']}")
    else:
        click.echo("No trust list imported: only this installation's own cards are trusted.")
    for f in info["facilities"]:
        click.echo(f"  {f['facility_id']:<24} {f['kind']:<9} {f['name']}{' (this installation)' if f['own'] else ''}")
        for k in f["keys"]:
            click.echo(f"      {k['fingerprint']}  {k['valid_from'] or '...'} to {k['valid_to'] or '...'}")


@trust_group.command("show")
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@handled
def trust_show(file):
    """Show what a trust-list file holds and who signed it, without importing it."""
    from clinic.signing.trust import read_trust_file
    tl, _, key = read_trust_file(file.read_bytes())
    emit_json(tl.to_dict() | {"signed_by_fingerprint": key.fingerprint})


def register(cli: click.Group) -> None:
    for cmd in (card_cmd, read_card_cmd, card_code_cmd, keys_group, trust_group):
        cli.add_command(cmd)
