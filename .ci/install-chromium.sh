#!/usr/bin/env bash
# Installs Debian's headless-capable Chromium for the report page test
# (tests/test_report_browser.py). Idempotent: does nothing when it is already there.
set -euo pipefail
if command -v chromium >/dev/null 2>&1; then
    exit 0
fi
if [ "$(id -u)" -ne 0 ]; then
    echo "install-chromium: need root for apt-get; the browser test will be skipped" >&2
    exit 0
fi
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq
apt-get install -y -qq --no-install-recommends chromium fonts-dejavu-core >/dev/null
command -v chromium
