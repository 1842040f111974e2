#!/usr/bin/env bash
# Installs Debian's prometheus package (which carries promtool) when either is missing: npm test runs
# `promtool check rules`, `promtool test rules`, `promtool check metrics` and a real Prometheus on loopback.
set -euo pipefail

if command -v promtool >/dev/null 2>&1 && command -v prometheus >/dev/null 2>&1; then
  echo "prometheus present: $(prometheus --version 2>&1 | head -n 1)"
  exit 0
fi

SUDO=""
if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
export DEBIAN_FRONTEND=noninteractive

# A fresh image may have no package lists yet; refresh them only when the first attempt fails.
if ! $SUDO apt-get install -y --no-install-recommends prometheus; then
  $SUDO apt-get update
  $SUDO apt-get install -y --no-install-recommends prometheus
fi
# The package starts a system service on install; the tests run their own on a free port.
$SUDO systemctl stop prometheus >/dev/null 2>&1 || true

promtool --version | head -n 1
