"""Cards in the browser: read a card three ways, import it, and print a pregnancy's card.

Reading (``/cards/``): a text field for a 2D scanner that types like a keyboard (autofocus,
its Enter submits), the camera through ``static/js/card-reader.js`` with the vendored jsQR
decoder (no network), or a photo uploaded and decoded on the server with zxing-cpp. All three
end in ``clinic.card.codec.read_card`` and the same result page.

Printing (``/cards/pregnancy/<id>``): the pocket card PDF, the PNG for a phone, four on A4,
and the referral note.
"""
from __future__ import annotations

from flask import Blueprint, Response, abort, flash, redirect, render_template, request, url_for

from clinic.accounts import roles as R
from clinic.card.qrtext import MAX_TEXT
from clinic.web.auth import current_user, may
from clinic.web.db import get_data_dir, get_settings, get_store, utcnow

bp = Blueprint("card", __name__, url_prefix="/cards")

MAX_PHOTO = 12 * 1024 * 1024  # the app's MAX_CONTENT_LENGTH may be lower; it is checked first


def _trust():
    from clinic.signing.trust import load_trust
    return load_trust(get_data_dir())


def _plan(reading):
    """The next actions by this facility's own protocol, from the card's history."""
    from clinic.card.issue import plan_dict
    c = reading.content
    if c is None:
        return None
    try:
        return plan_dict(c.woman, c.pregnancy, c.entries, get_settings(), utcnow(), store=get_store())
    except Exception as e:  # noqa: BLE001 - a plan that cannot be made must not hide the reading
        return {"error": f"the care engine could not plan from this card ({type(e).__name__}: {e})", "items": []}


def _result_view(reading, plan):
    from clinic.card.view import build_view
    c = reading.content
    if c is None:
        return None
    return build_view(c.woman, c.pregnancy, c.entries, plan=plan if plan and "error" not in plan else None,
                      issuer={"name": c.issuer_name, "phone": c.issuer_phone, "facility_id": c.issuer_id},
                      issue=c.issue, issued_at=c.issued_at, card_code=reading.code or "", omitted=c.omitted,
                      tz=get_settings().tz, now=utcnow())


def _show(reading, status=200, **extra):
    plan = _plan(reading)
    view = _result_view(reading, plan)
    plan_error = plan.get("error") if plan else None
    code = 200 if reading.trust in ("trusted", "unknown-issuer") else 422
    can_import = reading.trust == "trusted" and may(R.CARD_IMPORT)
    return render_template("card/result.html", reading=reading, view=view, plan_error=plan_error,
                           can_import=can_import, text=extra.pop("text", ""), nav_active="cards",
                           **extra), (status if status != 200 else code)


@bp.route("/")
def index():
    return render_template("card/read.html", nav_active="cards", error=None, text="")


@bp.route("/read", methods=["POST"])
def read():
    from clinic.card.codec import read_card
    text = request.form.get("code", "")
    via = request.form.get("via", "scanner")
    if via not in ("scanner", "camera", "typed"):
        via = "scanner"
    if not text.strip():
        return render_template("card/read.html", nav_active="cards", text="",
                               error="Nothing was read: scan the card's QR code into the field, or type the code."), 422
    if len(text) > MAX_TEXT:
        return render_template("card/read.html", nav_active="cards", text="",
                               error=f"The text is {len(text)} characters long; a card code is far shorter."), 422
    reading = read_card(text, _trust(), via=via)
    return _show(reading, text=text.strip())


@bp.route("/photo", methods=["POST"])
def photo():
    from clinic.card.codec import Reading, read_card
    from clinic.card.scan import ImageReadError, qr_texts
    f = request.files.get("photo")
    if f is None or not f.filename:
        return render_template("card/read.html", nav_active="cards", text="",
                               error="Choose a photo of the card to upload."), 422
    data = f.read(MAX_PHOTO + 1)
    if len(data) > MAX_PHOTO:
        return render_template("card/read.html", nav_active="cards", text="",
                               error="The photo is larger than 12 MB; send a smaller one."), 422
    try:
        texts = qr_texts(data)
    except ImageReadError as e:
        return _show(Reading("unreadable", str(e), "photo", stage="image"))
    reading = read_card(texts[0], _trust(), via="photo")
    return _show(reading, text=texts[0])


@bp.route("/import", methods=["POST"])
def import_card():
    from clinic.card.codec import read_card
    from clinic.card.importing import CardImportError, PossibleDuplicate, import_reading
    from clinic.records.validate import ValidationError
    from clinic.store import StoreError
    text = request.form.get("code", "")
    reading = read_card(text, _trust(), via="import")
    woman_id = request.form.get("woman_id") or None
    new_woman = request.form.get("new_woman") == "1"
    try:
        res = import_reading(get_store(), reading, data_dir=get_data_dir(), by=current_user().username,
                             woman_id=woman_id, new_woman=new_woman, now=utcnow())
    except PossibleDuplicate as e:
        return _show(reading, status=409, text=text, duplicates=e.candidates)
    except (CardImportError, ValidationError, StoreError) as e:
        return _show(reading, status=422, text=text, import_error=str(e))
    words = {"created": "added", "updated": "updated", "unchanged": "already here",
             "kept-local": "kept as recorded here",
             "not-owner": "not taken in (changes by the issuer to another facility's records; "
                          "the owner's copies are kept, the changes are in the audit log)"}
    counts = ", ".join(f"{n} {words.get(k, k)}" for k, n in sorted(res.counts.items()))
    issuer = (reading.content.issuer_name if reading.content else "") or res.issuer
    flash(f"Card issue {res.issue} of {issuer} imported: {counts}.")
    return redirect(url_for("records.pregnancy", pregnancy_id=res.pregnancy_id))


# ---- printing ----------------------------------------------------------------------------

def _issue(pregnancy_id, *, new: bool = False):
    """The pregnancy's current card. Showing or downloading never issues one (``new`` is the
    POST's): with no current issue, the page offers to issue it and a download answers 409."""
    from clinic.card.issue import CardIssueError, current_card, issue_card
    from clinic.signing.errors import KeyStoreError
    p = get_store().get(pregnancy_id)
    if p is None or p["kind"] != "pregnancy":
        abort(404, f"there is no pregnancy {pregnancy_id}")
    try:
        if new:
            return issue_card(get_data_dir(), get_store(), get_settings(), pregnancy_id,
                              by=current_user().username, now=utcnow())
        return current_card(get_data_dir(), get_store(), get_settings(), pregnancy_id, now=utcnow())
    except (CardIssueError, KeyStoreError) as e:
        abort(500, f"the card could not be issued: {e}")


def _issued(pregnancy_id):
    ic = _issue(pregnancy_id)
    if ic is None:
        abort(409, "this pregnancy has no card for its current history yet: issue it on the card page first")
    return ic


def _file(data: bytes, mimetype: str, name: str, download: bool):
    disp = "attachment" if download else "inline"
    return Response(data, mimetype=mimetype, headers={"Content-Disposition": f'{disp}; filename="{name}"',
                                                      "Cache-Control": "no-store"})


@bp.route("/pregnancy/<pregnancy_id>")
def pregnancy_card(pregnancy_id):
    ic = _issue(pregnancy_id)
    if ic is None:
        from clinic.card.issue import issued
        last = issued(get_data_dir(), pregnancy_id)
        woman = get_store().get(get_store().get(pregnancy_id)["woman_id"]) or {}
        return render_template("card/issue.html", pregnancy_id=pregnancy_id, woman=woman,
                               last=last[-1] if last else None, nav_active="cards")
    return render_template("card/print.html", ic=ic, v=ic.view, pregnancy_id=pregnancy_id,
                           has_referral=bool(ic.view["referrals"]), nav_active="cards")


@bp.route("/pregnancy/<pregnancy_id>", methods=["POST"])
def issue_pregnancy_card(pregnancy_id):
    ic = _issue(pregnancy_id, new=True)
    flash(f"Card issue {ic.issue} made: print it and give it to her; it replaces older cards."
          if not ic.reused else f"Card issue {ic.issue} is still current: nothing has changed since it was made.")
    return redirect(url_for("card.pregnancy_card", pregnancy_id=pregnancy_id))


@bp.route("/pregnancy/<pregnancy_id>/card.pdf")
def card_pdf(pregnancy_id):
    from clinic.card import printing
    ic = _issued(pregnancy_id)
    return _file(printing.card_pdf(ic.view), "application/pdf", f"card-issue-{ic.issue}.pdf",
                 request.args.get("download") == "1")


@bp.route("/pregnancy/<pregnancy_id>/card.png")
def card_png(pregnancy_id):
    from clinic.card import printing
    ic = _issued(pregnancy_id)
    return _file(printing.card_png(ic.view), "image/png", f"card-issue-{ic.issue}.png",
                 request.args.get("download") == "1")


@bp.route("/pregnancy/<pregnancy_id>/sheet.pdf")
def sheet_pdf(pregnancy_id):
    from clinic.card import printing
    ic = _issued(pregnancy_id)
    return _file(printing.sheet_pdf([ic.view] * 4), "application/pdf", f"cards-4up-issue-{ic.issue}.pdf",
                 request.args.get("download") == "1")


@bp.route("/pregnancy/<pregnancy_id>/referral.pdf")
def referral_pdf(pregnancy_id):
    from clinic.card import printing
    from clinic.card.view import show_date
    ic = _issued(pregnancy_id)
    _, _, entries = get_store().history(pregnancy_id)
    refs = sorted((e for e in entries if e["kind"] == "referral" and not e.get("voided")),
                  key=lambda r: (r["referred_on"], r["created_at"]))
    if not refs:
        abort(404, "this pregnancy has no referral record: record the referral (to whom, the reason and the "
                   "question asked) first")
    r = refs[-1]
    pdf = printing.referral_pdf(ic.view, {"to": r["to_facility"], "reason": r["reason"],
                                          "question": r.get("question", ""), "date": show_date(r["referred_on"])})
    return _file(pdf, "application/pdf", f"referral-{r['referred_on']}.pdf", request.args.get("download") == "1")
