#!/usr/bin/env bash
# Set up, then run the whole test suite (slow tests included). Extra arguments go to pytest.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup.sh
.venv/bin/python -m pytest -q -rs "$@"
