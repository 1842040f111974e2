#!/usr/bin/env bash
# Installs Debian's chromium for the dashboard browser test when it is missing. The test drives
# /usr/bin/chromium through playwright-core, so no browser is downloaded by npm.
set -euo pipefail

if [ -x /usr/bin/chromium ]; then
  echo "chromium present: $(/usr/bin/chromium --version 2>/dev/null || echo unknown version)"
  exit 0
fi

SUDO=""
if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
export DEBIAN_FRONTEND=noninteractive

# A fresh image may have no package lists yet; refresh them only when the first attempt fails.
if ! $SUDO apt-get install -y chromium; then
  $SUDO apt-get update
  $SUDO apt-get install -y chromium
fi

/usr/bin/chromium --version
