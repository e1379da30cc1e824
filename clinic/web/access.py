"""Which permission each endpoint of the app needs: the route table of the guard in auth.py.

Every endpoint of ``app.url_map`` must be listed here; one that is not is refused to every
role (and tests/security/test_role_table.py fails, naming it). A value is:

* ``PUBLIC``: no session (sign-in, static files, the service worker, phone setup pages);
* ``SIGNED_IN``: any signed-in person (their session, signing out, their own password);
* a permission of clinic.accounts.roles, or a tuple of them (any one suffices);
* a dict ``{method: one of the above}`` when reading and writing differ.

Where the record kind decides (an entry form, POST /api/v1/records, amend, void), the table
asks for any write permission and the view checks the kind's own permission
(``auth.require_kind``). Adding a route: add its endpoint here, and a line for it in
tests/security/test_role_table.py saying which roles may use it.
"""
from __future__ import annotations

from clinic.accounts import roles as R

PUBLIC = "public"
SIGNED_IN = "signed-in"

ENDPOINTS: dict[str, object] = {
    # sign-in, static files, offline shell, phone setup: no session
    "auth.signin": PUBLIC,
    "static": PUBLIC,
    "pages.service_worker": PUBLIC,
    "pages.manifest": PUBLIC,
    "setup.phone": PUBLIC,
    "setup.ca_certificate": PUBLIC,
    "setup.qr": PUBLIC,
    "setup.outbox": PUBLIC,
    "setup.offline": PUBLIC,
    "setup.ping": PUBLIC,
    # the person's own session
    "auth.signout": SIGNED_IN,
    "auth.switch": SIGNED_IN,
    "auth.password": SIGNED_IN,
    "api.session_info": SIGNED_IN,
    "api.openapi": SIGNED_IN,
    # Today sends a role that may not see names to its own start page (pages.today).
    "pages.today": SIGNED_IN,
    "pages.find": R.READ_RECORDS,
    "records.woman": R.READ_RECORDS,
    "records.pregnancy": R.READ_RECORDS,
    "records.booking": R.BOOK,
    "records.add_entry": R.ENTRY_PERMISSIONS,
    "records.amend": R.WRITE_PERMISSIONS,
    "records.void": R.WRITE_PERMISSIONS,
    "records.stock": {"GET": R.STOCK_READ, "POST": R.STOCK_RECORD},
    "tools.calculators": R.CALC,
    "tools.calculator": R.CALC,
    "api.create": R.WRITE_PERMISSIONS,
    "api.bookings": R.BOOK,
    "api.get_record": R.READ_RECORDS,
    "api.amend": R.WRITE_PERMISSIONS,
    "api.pregnancy": R.READ_RECORDS,
    "api.get_worklist": R.READ_RECORDS,
    "api.women": R.READ_RECORDS,
    "api.calc": R.CALC,
    "card.index": R.CARD_READ,
    "card.read": R.CARD_READ,
    "card.photo": R.CARD_READ,
    "card.import_card": R.CARD_IMPORT,
    "card.pregnancy_card": R.CARD_PRINT,
    "card.issue_pregnancy_card": R.CARD_PRINT,
    "card.card_pdf": R.CARD_PRINT,
    "card.card_png": R.CARD_PRINT,
    "card.sheet_pdf": R.CARD_PRINT,
    "card.referral_pdf": R.CARD_PRINT,
    # district.download also needs FOLLOW_UP for the formats that carry names (the view checks)
    "district.index": R.REPORT,
    "district.download": R.REPORT,
    "district.follow_up": R.FOLLOW_UP,
    "district.import_page": R.BUNDLE_IMPORT,
    "district.import_post": R.BUNDLE_IMPORT,
    "district.import_one": R.BUNDLE_IMPORT,
    "district.export_page": R.BUNDLE_EXPORT,
    "district.export_post": R.BUNDLE_EXPORT,
    "supply.index": R.STOCK_READ,
    "supply.download": R.STOCK_READ,
    "admin.users": R.USERS,
    "admin.user_add": R.USERS,
    "admin.user_action": R.USERS,
    "admin.audit": R.AUDIT,
}

# GET-like methods read; the rest need the CSRF token as well.
READ_METHODS = {"GET", "HEAD", "OPTIONS"}


class NotListed(LookupError):
    """An endpoint missing from ENDPOINTS."""


def rule_for(endpoint: str | None, method: str):
    """What the endpoint needs for this method (PUBLIC, SIGNED_IN, a permission or a tuple)."""
    if endpoint is None:
        return PUBLIC  # no route matched: the 404/405 handler answers, and it shows nothing
    try:
        spec = ENDPOINTS[endpoint]
    except KeyError:
        raise NotListed(f"endpoint {endpoint!r} is not in clinic.web.access.ENDPOINTS") from None
    if isinstance(spec, dict):
        m = "GET" if method in READ_METHODS else method
        if m not in spec:
            raise NotListed(f"endpoint {endpoint!r} lists no rule for {method}")
        spec = spec[m]
    return spec


def allows(role: str | None, rule) -> bool:
    """Whether a signed-in ``role`` passes ``rule`` (PUBLIC and SIGNED_IN pass everyone signed in)."""
    if rule in (PUBLIC, SIGNED_IN):
        return True
    if isinstance(rule, tuple):
        return R.may_any(role, rule)
    return R.may(role, rule)


def permission_words(rule) -> str:
    if isinstance(rule, tuple):
        return " or ".join(R.PERMISSIONS[p] for p in rule)
    return R.PERMISSIONS.get(rule, str(rule))
