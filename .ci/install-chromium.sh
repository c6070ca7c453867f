#!/usr/bin/env bash
# Debian's Chromium for the report's browser test (tests/flows/test_report.py), and poppler-utils for
# the print test's pdftotext. Idempotent: does nothing when both are already installed. Quiet unless
# something fails.
set -euo pipefail
if [ -x /usr/bin/chromium ] && [ -x /usr/bin/pdftotext ]; then
    exit 0
fi
run_as_root=()
if [ "$(id -u)" -ne 0 ]; then
    run_as_root=(sudo)
fi
export DEBIAN_FRONTEND=noninteractive
log="$(mktemp)"
trap 'rm -f "$log"' EXIT
if ! { "${run_as_root[@]}" apt-get update -qq && "${run_as_root[@]}" apt-get install -y -qq chromium poppler-utils; } >"$log" 2>&1; then
    cat "$log" >&2
    echo "install-chromium: could not install Debian's chromium and poppler-utils packages" >&2
    exit 1
fi
