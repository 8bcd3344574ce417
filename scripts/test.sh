#!/usr/bin/env bash
# Everything the test suite needs on a fresh Debian/Ubuntu machine, then the suite itself.
# The browser test of the HTML report needs Debian's chromium and chromium-driver.
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v chromium >/dev/null 2>&1 || ! command -v chromedriver >/dev/null 2>&1; then
  SUDO=""
  if [ "$(id -u)" != "0" ]; then SUDO="sudo"; fi
  $SUDO apt-get update -qq
  $SUDO env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium chromium-driver >/dev/null
fi
python -m pip install -q -e '.[test]'
python -m pytest "$@"
