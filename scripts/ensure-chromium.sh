#!/usr/bin/env bash
# Install Debian's headless Chromium for the report's browser test when it is missing.
# Needs root (as on CI and the development machines); otherwise the browser test is skipped.
set -u
if command -v chromium >/dev/null 2>&1 || command -v chromium-browser >/dev/null 2>&1; then
  exit 0
fi
if [ "$(id -u)" != "0" ] || ! command -v apt-get >/dev/null 2>&1; then
  echo "chromium not found and cannot be installed here (needs root and apt-get); browser tests will be skipped" >&2
  exit 0
fi
echo "installing chromium from the system's packages for the browser test..." >&2
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq >/dev/null 2>&1 || true
apt-get install -y -qq --no-install-recommends chromium >/dev/null 2>&1 \
  || echo "chromium could not be installed; browser tests will be skipped" >&2
exit 0
