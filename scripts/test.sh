#!/usr/bin/env bash
# Install what the tests need (Python packages; Debian chromium for the browser
# tests, when running as root and it is missing) and run the whole suite.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v chromium >/dev/null 2>&1 && [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq >/dev/null
    apt-get install -y -qq chromium >/dev/null
fi
python3 -m pip install --quiet --disable-pip-version-check -e '.[test]'
python3 -m pytest "$@"
