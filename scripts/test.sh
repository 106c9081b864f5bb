#!/usr/bin/env bash
# Install what the tests need (Python packages; Debian chromium for the browser
# tests and Debian postgresql for the storage tests, when running as root and missing; axe-core from npm), lint and type-check, and run the whole suite.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v chromium >/dev/null 2>&1 && [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq >/dev/null
    apt-get install -y -qq chromium >/dev/null
fi
# Debian's PostgreSQL server for the tests that run on both stores (they start a
# throwaway one of their own with initdb and pg_ctl, and are skipped, saying why, without it).
if ! ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1 && ! command -v initdb >/dev/null 2>&1 \
        && [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    apt-get update -qq >/dev/null
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends postgresql >/dev/null
fi
python3 -m pip install --quiet --disable-pip-version-check -e '.[test]'
# axe-core (npm) for the browser tests' accessibility audit, into a folder they read.
if ! command -v npm >/dev/null 2>&1 && [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    apt-get update -qq >/dev/null
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq npm >/dev/null
fi
if [ ! -f tests/.axe/node_modules/axe-core/axe.min.js ]; then
    mkdir -p tests/.axe
    npm install --no-save --no-audit --no-fund --silent --prefix tests/.axe axe-core@4 >/dev/null
fi
# Lint (the rules chosen in pyproject.toml) and type-check, then the tests; the tests
# run even when a check fails, and the script fails if any of the three did.
# Many small dense fits on a shared machine: one BLAS thread each (OpenBLAS's idle
# workers spin and make a small least-squares fit several times slower under load).
export OPENBLAS_NUM_THREADS="${OPENBLAS_NUM_THREADS:-1}"
checks=0
python3 -m ruff check . || checks=1
python3 -m mypy || checks=1
tests=0
python3 -m pytest "$@" || tests=$?
if [ "$tests" -ne 0 ]; then exit "$tests"; fi
exit "$checks"
