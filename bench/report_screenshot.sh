#!/usr/bin/env bash
# Renders a run's report.html to a PNG with headless Chromium (Debian's `chromium` package,
# installed here when missing: it is not part of the main set-up), for looking at the report
# as a browser shows it.
#   bench/report_screenshot.sh OUT/report.html [report.png] [width] [height]
set -euo pipefail
html="$(realpath "$1")"
png="${2:-${1%.html}.png}"
width="${3:-1400}"
height="${4:-6000}"
if ! command -v chromium >/dev/null 2>&1; then
  sudo=""
  [ "$(id -u)" -ne 0 ] && sudo="sudo"
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends chromium
fi
profile="$(mktemp -d)"
trap 'rm -rf "$profile"' EXIT
# No network: the report is self-contained; the flags keep Chromium from reaching out.
chromium --headless --no-sandbox --disable-gpu --disable-quic --no-first-run --disable-background-networking \
  --disable-component-update --disable-sync --user-data-dir="$profile" --hide-scrollbars \
  --window-size="${width},${height}" --screenshot="$(realpath -m "$png")" "file://$html" 2>/dev/null
echo "wrote $png"
