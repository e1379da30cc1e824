#!/usr/bin/env bash
# Install everything (venv, test extras, chromium) and run the whole test suite.
# Exits non-zero when a test fails or when no test ran (pytest's exit 5).
set -euo pipefail
cd "$(dirname "$0")/.."
scripts/install.sh --test
venv="${RHLEDGER_VENV:-.venv}"
mkdir -p test-artifacts
exec "$venv/bin/python" -m pytest -q -p no:cacheprovider "$@"
