#!/usr/bin/env bash
# Lint (ruff: pyflakes, pycodestyle, import order, bugbear) and type-check (mypy on the pure
# packages clinic/records and clinic/care). Configuration lives in pyproject.toml.
set -euo pipefail
cd "$(dirname "$0")/.."
venv="${RHLEDGER_VENV:-.venv}"
"$venv/bin/ruff" check clinic tests seed_demo bench scripts
"$venv/bin/mypy"
