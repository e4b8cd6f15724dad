#!/usr/bin/env bash
# Install what the tests need and run them: the README's test command, also called by .ci/run.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v gfortran >/dev/null 2>&1; then
    if [ "$(id -u)" = 0 ]; then
        apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq gfortran
    elif command -v sudo >/dev/null 2>&1; then
        sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq gfortran
    else
        echo "gfortran is missing and cannot be installed here: the compiler tests will be skipped" >&2
    fi
fi
python3 -m pip install -q -e '.[test]'
python3 -m pytest "$@"
