"""Today's worklist of one clinic with 2,000 ongoing pregnancies: the engine call behind the page
(``clinic.web.worklist.build`` in a request context), and the page itself over HTTP from
``rhledger serve`` (signed in, GET /). Median of several calls after a first one, which is
reported apart (it fills the read caches)."""
from __future__ import annotations

import statistics
import time
from datetime import datetime, timezone
from pathlib import Path

from bench.serving import Client, Server

FACILITY = "synth-001"
USER, PASSWORD = "midwife", "bench-only-password"
REPEAT = 5


def clinic_config(facility: str = FACILITY) -> str:
    """config.toml of a synthetic clinic with one midwife account (invented; bench only)."""
    from werkzeug.security import generate_password_hash

    from seed_demo.synthetic import PRODUCT, SMALL_PRODUCT, SYNTH_MARKER, TIMEZONE

    return "\n".join([
        SYNTH_MARKER, "[facility]", f'id = "{facility}"', 'name = "Synthetic clinic"', 'kind = "clinic"',
        f'timezone = "{TIMEZONE}"', "", "[care]", 'profile = "bsh-2014"', "", "[stock]", "products = [",
        f'  {{ name = "{PRODUCT}", vial_iu = 1500, routes = ["IM", "IV"] }},',
        f'  {{ name = "{SMALL_PRODUCT}", vial_iu = 500, routes = ["IM"] }},', "]", "",
        "[[accounts]]", f'username = "{USER}"', 'display_name = "Bench midwife"', 'role = "midwife"',
        f'password_hash = "{generate_password_hash(PASSWORD, method="pbkdf2:sha256:1000")}"', ""])


def build_clinic(d: Path, pregnancies: int, now: datetime) -> dict:
    """One clinic whose ``pregnancies`` bookings all fall in the last four months (all ongoing)."""
    from seed_demo.synthetic import build_synthetic

    per_month = max(40, pregnancies // 4)
    built = build_synthetic(d, 1, pregnancies, seed=3, now=now, per_month=per_month, force=True)
    (d / "config.toml").write_text(clinic_config(), encoding="utf-8")
    return built


def run(root: Path, pregnancies: int, log, repeat: int = REPEAT) -> dict:
    from clinic.store import Store
    from clinic.web import create_app, worklist

    now = datetime.now(timezone.utc).replace(microsecond=0)
    d = root / "worklist-clinic"
    build_clinic(d, pregnancies, now)
    ongoing = len(Store(d).pregnancies(status="ongoing"))
    out: dict = {"pregnancies": pregnancies, "ongoing": ongoing}

    app = create_app(d)
    times = []
    with app.test_request_context("/"):
        for _ in range(repeat + 1):
            t = time.perf_counter()
            wl = worklist.build("all")
            times.append(1000 * (time.perf_counter() - t))
    out.update(engine=statistics.median(times[1:]), engine_first=times[0], rows=len(wl["rows"]))
    log(f"  worklist engine: {out['engine']:.0f} ms ({out['rows']} rows; first call {out['engine_first']:.0f} ms)")

    server = Server(d).start()
    try:
        c = Client(server.url)
        c.signin(USER, PASSWORD)
        page_times = []
        size = 0
        for _ in range(repeat + 1):
            t = time.perf_counter()
            status, body = c.get("/")
            page_times.append(1000 * (time.perf_counter() - t))
            if status != 200:
                raise RuntimeError(f"GET / answered {status}")
            size = len(body)
    finally:
        server.stop()
    out.update(http=statistics.median(page_times[1:]), http_first=page_times[0], page_bytes=size)
    log(f"  worklist page over HTTP: {out['http']:.0f} ms ({size:,} bytes)")
    return out
