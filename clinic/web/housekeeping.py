"""Work the running server does on its own: the daily backup.

`create_app` makes a backup at start when the newest is a day old; a server left running for
days needs the same check while it runs, so `serve` starts this timer.
"""
from __future__ import annotations

import sys
import threading

from clinic.store import Store, StoreError

CHECK_EVERY_S = 3600.0


def backup_once(store: Store) -> None:
    """One daily-backup check; a failure is reported on stderr and retried at the next check."""
    try:
        made = store.daily_backup_if_due()
    except (StoreError, OSError) as e:
        print(f"rhledger: daily backup failed: {e}; it will be tried again in an hour", file=sys.stderr)
        return
    if made is not None:
        print(f"rhledger: daily backup written to {made}", file=sys.stderr)


def start_daily_backups(store: Store, every_s: float = CHECK_EVERY_S) -> threading.Event:
    """Check hourly in a daemon thread whether the daily backup is due; set the event to stop."""
    stop = threading.Event()

    def loop() -> None:
        while not stop.wait(every_s):
            backup_once(store)

    threading.Thread(target=loop, name="rhledger-daily-backup", daemon=True).start()
    return stop
