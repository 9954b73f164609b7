#!/usr/bin/env bash
# Set up and run Attesta on a fresh Debian-like machine with Python 3.11+ and git.
#   ./run.sh demo [--port N]   virtual environment, packages, demo database, then serve it
#   ./run.sh test [PYTEST ARGS] virtual environment, packages, chromium, then the whole test suite
#   ./run.sh bench              the benchmarks (not part of the tests); figures go to tests/benchmarks/results/
set -euo pipefail
cd "$(dirname "$0")"

python_bin() {
  for candidate in "${PYTHON:-}" python3.13 python3.12 python3.11 python3; do
    [ -n "$candidate" ] || continue
    if command -v "$candidate" >/dev/null 2>&1 &&
       "$candidate" -c 'import sys; sys.exit(sys.version_info < (3, 11))' 2>/dev/null; then
      echo "$candidate"; return
    fi
  done
  echo "Attesta needs Python 3.11 or newer (set PYTHON=/path/to/python3.11)" >&2
  exit 1
}

setup_venv() {
  if [ ! -x .venv/bin/python ]; then
    "$(python_bin)" -m venv .venv
  fi
  local stamp=.venv/.attesta-installed want
  want=$(cat pyproject.toml | sha256sum | cut -c1-64)
  if [ ! -f "$stamp" ] || [ "$(cat "$stamp")" != "$want" ]; then
    echo "installing Python packages into .venv ..."
    .venv/bin/python -m pip install --quiet --upgrade pip
    .venv/bin/python -m pip install --quiet -e '.[test]'
    echo "$want" > "$stamp"
  fi
}

ensure_chromium() {
  if [ -x /usr/bin/chromium ] || command -v chromium >/dev/null 2>&1; then return; fi
  local sudo=""
  if [ "$(id -u)" != 0 ]; then
    if command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then sudo="sudo"; else sudo="none"; fi
  fi
  if [ "$sudo" != none ] && command -v apt-get >/dev/null 2>&1; then
    echo "installing Debian's chromium for the browser tests ..."
    $sudo apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq chromium fonts-dejavu-core >/dev/null
  else
    echo "WARNING: chromium is not installed and cannot be installed here; browser tests will be skipped" >&2
  fi
}

ensure_postgresql() {
  if ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1 || command -v initdb >/dev/null 2>&1; then return; fi
  local sudo=""
  if [ "$(id -u)" != 0 ]; then
    if command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then sudo="sudo"; else sudo="none"; fi
  fi
  if [ "$sudo" != none ] && command -v apt-get >/dev/null 2>&1; then
    echo "installing Debian's postgresql for the tests on PostgreSQL ..."
    $sudo apt-get update -qq
    DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq postgresql >/dev/null
  else
    echo "WARNING: postgresql is not installed and cannot be installed here; tests on PostgreSQL will be skipped" >&2
  fi
}

command=${1:-}
shift || true
case "$command" in
  demo)
    setup_venv
    demo_db=${ATTESTA_DEMO_DB:-demo.db}
    export ATTESTA_DATASET_NAME=${ATTESTA_DATASET_NAME:-"Demo: an invented world, 1688-1740"}
    .venv/bin/attesta demo --db "$demo_db" --replace
    exec .venv/bin/attesta serve --db "$demo_db" "$@"
    ;;
  test)
    setup_venv
    ensure_chromium
    ensure_postgresql
    exec .venv/bin/python -m pytest "$@"
    ;;
  bench)
    setup_venv
    exec .venv/bin/python -m pytest tests/benchmarks -p no:cacheprovider -s "$@"
    ;;
  *)
    echo "usage: ./run.sh demo | test | bench" >&2
    exit 2
    ;;
esac
