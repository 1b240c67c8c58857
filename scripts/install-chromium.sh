#!/bin/sh
# Installs Debian's chromium for the browser tests (web/browser_test.go) when
# it is missing. CI runs on a fresh machine as root; elsewhere, run it with
# sudo or install chromium yourself (the tests look for /usr/bin/chromium,
# or the path in $HANDOFF_CHROMIUM).
set -eu
if [ -n "${HANDOFF_CHROMIUM:-}" ] && [ -x "$HANDOFF_CHROMIUM" ]; then
  exit 0
fi
if [ -x /usr/bin/chromium ]; then
  exit 0
fi
if [ "$(id -u)" -ne 0 ]; then
  echo "install-chromium: /usr/bin/chromium is missing; run this script as root (apt-get install chromium)" >&2
  exit 1
fi
export DEBIAN_FRONTEND=noninteractive
if command -v flock >/dev/null 2>&1; then
  flock /tmp/apt.lock apt-get update
  flock /tmp/apt.lock apt-get install -y --no-install-recommends chromium
else
  apt-get update
  apt-get install -y --no-install-recommends chromium
fi
/usr/bin/chromium --version
