#!/usr/bin/env bash
# Install rhledger and start it on a fresh copy of the invented demo scenario.
# Extra arguments go to `rhledger demo` (e.g. --site hospital --port 5081).
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install.sh
venv="${RHLEDGER_VENV:-.venv}"
exec "$venv/bin/rhledger" demo --data "${RHLEDGER_DATA:-instance}" --force "$@"
