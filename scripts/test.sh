#!/usr/bin/env bash
# Install everything the tests need from the project's own files, then lint and test.
# Used by people (see README) and by CI (.ci/run) alike.
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v chromium >/dev/null 2>&1; then
  if [ "$(id -u)" = "0" ]; then
    export DEBIAN_FRONTEND=noninteractive
    # Another apt (an unattended upgrade, a colleague's install) may hold the lock: wait for it.
    apt_wait=(-o DPkg::Lock::Timeout=600)
    apt-get "${apt_wait[@]}" update -qq
    apt-get "${apt_wait[@]}" install -y -qq --no-install-recommends chromium fonts-dejavu-core >/dev/null
  else
    echo "chromium is missing: run 'sudo apt-get install chromium' (browser tests need it)" >&2
    exit 1
  fi
fi

python -m pip install -q -e ".[test]"
python -m ruff check .
python -m pytest "$@"
