#!/usr/bin/env bash
# Create .venv (if missing) and install vibest with its test tools from this repository.
set -euo pipefail
cd "$(dirname "$0")/.."
PY=${PYTHON:-python3}
if [ ! -x .venv/bin/python ]; then
  "$PY" -m venv .venv
fi
.venv/bin/python -m pip install --quiet --upgrade pip >/dev/null 2>&1 || true
.venv/bin/python -m pip install --quiet -e ".[test]"
# Headless Chromium renders the HTML reports in the tests (Debian's package); where it cannot be
# installed those tests are skipped and say why.
if ! command -v chromium >/dev/null 2>&1 && command -v apt-get >/dev/null 2>&1 && [ "$(id -u)" = 0 ]; then
  apt-get install -y -q chromium >/dev/null 2>&1 \
    || { apt-get update -q >/dev/null 2>&1 && apt-get install -y -q chromium >/dev/null 2>&1; } \
    || echo "setup: Debian's chromium could not be installed; the report browser tests will be skipped" >&2
fi
