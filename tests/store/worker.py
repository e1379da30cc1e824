"""A child process for the durability and concurrency tests (run: python -m tests.store.worker).

    create DATA PREGNANCY_ID N TAG   create N typing entries; print each id once create() returned
    amend DATA RECORD_ID N TAG       amend one record N times without expected_version
(create and amend print "ready", then wait for a line on stdin so that workers start together)
    forever DATA PREGNANCY_ID        create entries until killed, printing each acknowledged id
    import DATA BATCH.json           merge_foreign_many the records of the file; prints "start"
                                     just before the call and "done" after it
"""
from __future__ import annotations

import sys
from datetime import datetime, timezone

from clinic.store import Store

NOW = datetime(2026, 3, 16, 9, 30, tzinfo=timezone.utc)


def typing_fields(i: int) -> dict:
    return {"abo": "O", "rhd": "negative", "tested_on": "2026-03-02", "lab": f"lab-{i}"}


def main(argv: list[str]) -> None:
    cmd, data = argv[0], argv[1]
    store = Store(data)
    out = sys.stdout
    if cmd in ("create", "amend"):
        # Start together with the other workers: say ready, wait for the parent's go.
        out.write("ready\n")
        out.flush()
        sys.stdin.readline()
    if cmd in ("create", "forever"):
        pid = argv[2]
        n = int(argv[3]) if cmd == "create" else 10 ** 9
        tag = argv[4] if cmd == "create" else "k"
        for i in range(n):
            rec = store.create("typing", typing_fields(i), by=f"worker-{tag}", facility="test-clinic",
                               pregnancy_id=pid, now=NOW).record
            out.write(rec["id"] + "\n")
            out.flush()
    elif cmd == "amend":
        rid, n = argv[2], int(argv[3])
        for i in range(n):
            cur = store.get(rid)
            lab = f"{cur.get('lab', '')}|{i}"[-100:]
            store.amend(rid, {"lab": lab + f"-{argv[4] if len(argv) > 4 else 'x'}"}, by="worker",
                        reason="concurrency test", now=NOW)
        out.write("done\n")
    elif cmd == "import":
        import json

        batch = json.loads(open(argv[2], encoding="utf-8").read())
        out.write("start\n")
        out.flush()
        store.merge_foreign_many(batch, now=NOW)
        out.write("done\n")
    else:
        raise SystemExit(f"unknown command {cmd}")


if __name__ == "__main__":
    main(sys.argv[1:])
