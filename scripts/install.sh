#!/usr/bin/env bash
# Install rhledger into ./.venv (or $RHLEDGER_VENV) from this checkout.
# Usage: scripts/install.sh [--test]   (--test adds the test extras and Debian's chromium)
set -euo pipefail
cd "$(dirname "$0")/.."
venv="${RHLEDGER_VENV:-.venv}"
extras=""
if [ "${1:-}" = "--test" ]; then
  extras="[test]"
  if [ ! -x /usr/bin/chromium ]; then
    # Browser tests drive Debian's chromium through Playwright; Playwright's own download is not used.
    sudo_cmd=""; [ "$(id -u)" -ne 0 ] && sudo_cmd="sudo"
    $sudo_cmd apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo_cmd apt-get install -y -qq chromium fonts-dejavu-core >/dev/null
  fi
fi
[ -x "$venv/bin/python" ] || python3 -m venv "$venv"
"$venv/bin/python" -m pip install -q --upgrade pip
"$venv/bin/python" -m pip install -q -e ".$extras"
