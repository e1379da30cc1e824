"""A server left running makes its daily backup without a restart."""
from datetime import datetime, timedelta, timezone

from clinic.web.housekeeping import backup_once, start_daily_backups


def _backups(data_dir):
    return sorted((data_dir / "backups").glob("rhledger-backup-*.tar.gz"))


def test_backup_once_writes_a_backup_only_when_a_day_has_passed(app, store):
    data_dir = store.data_dir
    before = _backups(data_dir)
    assert before, "create_app makes the first backup at start"
    backup_once(store)                 # less than a day since the last one: nothing new
    assert _backups(data_dir) == before
    # Pretend the newest backup is 25 hours old by asking the store with a later clock.
    made = store.daily_backup_if_due(now=datetime.now(timezone.utc) + timedelta(hours=25))
    assert made is not None and made.exists()
    assert len(_backups(data_dir)) == len(before) + 1


def test_the_timer_thread_checks_and_stops(store, monkeypatch):
    calls = []
    monkeypatch.setattr(type(store), "daily_backup_if_due", lambda self, now=None: calls.append(1))
    stop = start_daily_backups(store, every_s=0.05)
    try:
        import time
        deadline = time.monotonic() + 5
        while not calls and time.monotonic() < deadline:
            time.sleep(0.02)
    finally:
        stop.set()
    assert calls, "the timer called daily_backup_if_due"
