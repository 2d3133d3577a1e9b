#!/usr/bin/env bash
# The wheel, installed into a fresh virtual environment outside the checkout,
# starts the service from another folder (issue 18): package data, entry point,
# demo, contract and report all come from the installed package.
set -euo pipefail
root="$(cd "$(dirname "$0")/.." && pwd)"
work="$(mktemp -d /tmp/cycleledger-wheel-XXXXXX)"
trap 'rm -rf "$work"' EXIT
"$root/.venv/bin/pip" wheel --quiet --no-deps "$root" -w "$work/dist"
python3 -m venv "$work/venv"
"$work/venv/bin/pip" install --quiet --upgrade pip
"$work/venv/bin/pip" install --quiet "$work"/dist/cycleledger-*.whl
mkdir "$work/run"
cp "$root/.ci/wheel_check.py" "$work/run/"
cd "$work/run"
"$work/venv/bin/python" wheel_check.py "$root"
