#!/usr/bin/env bash
# Everyday loop: lint and type-check, then the suite in parallel without the slow and browser tests.
# Assumes scripts/install.sh --test has run once. Extra arguments go to pytest
# (e.g. `scripts/fast.sh tests/care`). The whole suite, as CI runs it: scripts/test.sh.
set -euo pipefail
cd "$(dirname "$0")/.."
venv="${RHLEDGER_VENV:-.venv}"
scripts/lint.sh
exec "$venv/bin/python" -m pytest -q -p no:cacheprovider -n auto -m "not slow and not browser" "$@"
