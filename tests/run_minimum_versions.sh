#!/usr/bin/env bash
# Run the test suite against the oldest versions pyproject.toml allows.
#
# Builds a fresh virtual environment (default /tmp/zoneprofile-minimum-venv, or $1) with the
# dependencies named in pyproject.toml, held to tests/constraints-minimum.txt, and runs the
# default test run and then the slow tests from this checkout (PYTHONPATH, no install of the
# package itself). Usage: tests/run_minimum_versions.sh [venv-folder] [extra pytest arguments]
set -euo pipefail
cd "$(dirname "$0")/.."
venv="${1:-/tmp/zoneprofile-minimum-venv}"
shift || true
python="${PYTHON:-python3}"

rm -rf "$venv"
"$python" -m venv "$venv"
# the requirements exactly as pyproject.toml states them (dependencies + the test extra)
mapfile -t reqs < <("$venv/bin/python" - <<'PY'
import tomllib
meta = tomllib.load(open("pyproject.toml", "rb"))["project"]
for req in meta["dependencies"] + meta["optional-dependencies"]["test"]:
    print(req.split("#")[0].strip())
PY
)
"$venv/bin/pip" install -q --upgrade pip
"$venv/bin/pip" install -q -c tests/constraints-minimum.txt "${reqs[@]}"
"$venv/bin/python" tests/versions.py
PYTHONPATH="$PWD" "$venv/bin/python" -m pytest -q -p no:cacheprovider "$@"
PYTHONPATH="$PWD" "$venv/bin/python" -m pytest -q -p no:cacheprovider -m slow "$@"
