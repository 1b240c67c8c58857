#!/bin/sh
# Installs Debian's chromium for the browser tests (web/browser_test.go) when
# it is missing, with the Liberation fonts the report's plots are measured in
# (gonum/plot lays out text with Liberation Sans; a wider fallback font would
# push labels past the plots' edges). CI runs on a fresh machine as root;
# elsewhere, run it with sudo or install chromium and fonts-liberation
# yourself (the tests look for /usr/bin/chromium, or the path in
# $HANDOFF_CHROMIUM).
set -eu
fonts=yes
if command -v fc-list >/dev/null 2>&1 && ! fc-list | grep -qi "Liberation Sans"; then
  fonts=no
fi
if [ -n "${HANDOFF_CHROMIUM:-}" ] && [ -x "$HANDOFF_CHROMIUM" ] && [ "$fonts" = yes ]; then
  exit 0
fi
if [ -x /usr/bin/chromium ] && [ "$fonts" = yes ]; then
  exit 0
fi
if [ "$(id -u)" -ne 0 ]; then
  echo "install-chromium: /usr/bin/chromium or the Liberation fonts are missing; run this script as root (apt-get install chromium fonts-liberation)" >&2
  exit 1
fi
export DEBIAN_FRONTEND=noninteractive
if command -v flock >/dev/null 2>&1; then
  flock /tmp/apt.lock apt-get update
  flock /tmp/apt.lock apt-get install -y --no-install-recommends chromium fonts-liberation
else
  apt-get update
  apt-get install -y --no-install-recommends chromium fonts-liberation
fi
/usr/bin/chromium --version
