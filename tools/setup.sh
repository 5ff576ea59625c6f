#!/usr/bin/env bash
# Set up a development environment in .venv: the Python package with its
# test extras, the MicroPython runner's npm packages, and ngspice.
# Safe to run again; it only installs what is missing.
set -euo pipefail
cd "$(dirname "$0")/.."

if [ ! -x .venv/bin/python ]; then
    python3 -m venv .venv
fi
.venv/bin/python -m pip install --quiet --upgrade pip
.venv/bin/python -m pip install --quiet -e ".[test]"

(cd tools/upy && npm ci --no-audit --no-fund --loglevel=error)

if ! command -v ngspice >/dev/null 2>&1; then
    if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
        apt-get update -qq
        DEBIAN_FRONTEND=noninteractive apt-get install -y -qq ngspice >/dev/null
    else
        echo "setup: ngspice is missing; install it (Debian/Ubuntu: sudo apt-get install ngspice)" >&2
        exit 1
    fi
fi
echo "setup: ready (.venv, tools/upy/node_modules, $(command -v ngspice))"
