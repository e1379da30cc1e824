#!/usr/bin/env bash
# Install everything (venv, test extras, chromium), lint and type-check, and run the whole test
# suite (two workers; browser and slow tests included). Exits non-zero when a check or a test
# fails, or when no test ran (pytest's exit 5). Extra arguments go to pytest.
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install.sh --test
venv="${RHLEDGER_VENV:-.venv}"
mkdir -p test-artifacts
scripts/lint.sh
exec "$venv/bin/python" -m pytest -q -p no:cacheprovider -n "${RHLEDGER_TEST_WORKERS:-2}" "$@"
