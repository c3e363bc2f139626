#!/usr/bin/env bash
# Sets up the pinned reference venv and checks that every committed fixture regenerates identically.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
python="$(bash "$here/setup_venv.sh" | tail -n 1)"
export PYTHONDONTWRITEBYTECODE=1
exec "$python" "$here/check_fixtures.py"
