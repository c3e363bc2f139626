#!/usr/bin/env bash
# Creates (or reuses) the reference-check venv at .venv in the repository root.
set -euo pipefail
root="$(cd "$(dirname "$0")/../.." && pwd)"
venv="$root/.venv"
if [ ! -x "$venv/bin/python" ]; then
  python3 -m venv "$venv"
fi
"$venv/bin/pip" install -q --disable-pip-version-check -r "$root/tests/python/requirements.txt"
echo "$venv/bin/python"
