#!/usr/bin/env bash
# Check the HTML report in a real headless browser: write a report of a
# synthetic test set (the ignored test `write_demo_report` in
# tests/report.rs), then take a screenshot with Debian's chromium.
#
#   scripts/screenshot_report.sh [OUT.png] [REPORT.html]
#
# Without REPORT.html the demo report is written first to
# target/report-demo/report.html. Needs: apt-get install -y chromium
# (the script installs it when missing and it runs as root). The browser
# runs with networking features off; the page needs none.
set -euo pipefail
cd "$(dirname "$0")/.."

out="${1:-target/report-demo/report.png}"
report="${2:-}"
if [[ -z "$report" ]]; then
  report="target/report-demo/report.html"
  TACTREAD_DEMO_REPORT="$PWD/$report" cargo test --quiet --test report -- --ignored write_demo_report
fi
[[ -f "$report" ]] || { echo "no report at $report" >&2; exit 1; }

if ! command -v chromium >/dev/null 2>&1; then
  if [[ $(id -u) -eq 0 ]]; then
    apt-get update -q && DEBIAN_FRONTEND=noninteractive apt-get install -y -q chromium
  else
    echo "chromium is not installed: run apt-get install -y chromium" >&2
    exit 1
  fi
fi

profile="$(mktemp -d)"
trap 'rm -rf "$profile"' EXIT
mkdir -p "$(dirname "$out")"
abs_report="$(cd "$(dirname "$report")" && pwd)/$(basename "$report")"
abs_out="$(cd "$(dirname "$out")" && pwd)/$(basename "$out")"
height="${SCREENSHOT_HEIGHT:-2400}"
chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
  --disable-background-networking --disable-component-update --disable-sync \
  --user-data-dir="$profile" --hide-scrollbars \
  --screenshot="$abs_out" --window-size="1200,$height" "file://$abs_report" 2>/dev/null
[[ -s "$abs_out" ]] || { echo "chromium wrote no screenshot" >&2; exit 1; }
echo "screenshot: $abs_out"
