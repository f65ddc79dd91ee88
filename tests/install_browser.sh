#!/usr/bin/env bash
# Headless Chromium and its WebDriver for the site page's browser test, from Debian's packages (chromium,
# chromium-driver). The README's test command runs this, and so CI does; nothing downloads a browser of its own.
# Does nothing when both are already installed; uses sudo when not run as root.
set -euo pipefail
if command -v chromium >/dev/null 2>&1 && command -v chromedriver >/dev/null 2>&1; then
    exit 0
fi
run() { if [ "$(id -u)" = 0 ]; then "$@"; else sudo "$@"; fi; }
export DEBIAN_FRONTEND=noninteractive
run apt-get update -qq
run apt-get install -y -qq --no-install-recommends chromium chromium-driver >/dev/null
