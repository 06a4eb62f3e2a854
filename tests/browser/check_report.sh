#!/usr/bin/env bash
# Opens a lightfold report.html in headless Chromium and checks it: loads with no console
# errors and no network requests, every <figure data-plot> has drawn SVG content. Keeps a
# full-page screenshot next to the report (report.html -> report.screenshot.png).
#
# Usage:
#   tests/browser/check_report.sh path/to/report.html
#   tests/browser/check_report.sh            # builds the demo report first (synthetic data)
#
# Needs python3 (standard library only) and Debian's chromium; installs chromium with
# apt-get when it is missing and we are root. Without apt (or not root) the check is
# skipped with a message and exit code 0, unless LIGHTFOLD_REQUIRE_BROWSER=1 (then 1).
# Exit codes: 0 ok or skipped, 1 a check failed, 2 the browser could not be run.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
repo="$(cd "$here/../.." && pwd)"

skip() {
    echo "SKIP: browser check: $1" >&2
    if [ "${LIGHTFOLD_REQUIRE_BROWSER:-0}" = "1" ]; then exit 1; fi
    exit 0
}

chromium="${CHROMIUM:-/usr/bin/chromium}"
if [ ! -x "$chromium" ]; then
    if ! command -v apt-get >/dev/null 2>&1; then
        skip "chromium is not installed and apt-get is not available"
    fi
    if [ "$(id -u)" != "0" ]; then
        skip "chromium is not installed and we are not root (run: apt-get install -y chromium)"
    fi
    echo "installing chromium with apt-get ..." >&2
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq >/dev/null || skip "apt-get update failed"
    apt-get install -y -qq chromium >/dev/null || skip "apt-get install chromium failed"
fi
command -v python3 >/dev/null 2>&1 || skip "python3 is not available"

if [ $# -ge 1 ]; then
    html="$1"
else
    export LIGHTFOLD_REPORT_DEMO_DIR="${LIGHTFOLD_REPORT_DEMO_DIR:-$repo/target/report-demo}"
    (cd "$repo" && cargo test --quiet --test report_demo -- --ignored >/dev/null)
    html="$LIGHTFOLD_REPORT_DEMO_DIR/report.html"
fi
[ -f "$html" ] || { echo "error: $html: no such file" >&2; exit 1; }

shot="${html%.html}.screenshot.png"
exec python3 "$here/cdp_check.py" --chromium "$chromium" --html "$html" --screenshot "$shot"
