#!/usr/bin/env bash
# Render a cairn HTML report in headless Chromium and write a screenshot, to check that
# the inline figures display. Installs Debian's chromium package when it is missing.
#   scripts/check-html.sh REPORT.html [SCREENSHOT.png] [HEIGHT_PX]
set -euo pipefail
report="${1:?usage: scripts/check-html.sh REPORT.html [SCREENSHOT.png] [HEIGHT_PX]}"
shot="${2:-report-screenshot.png}"
height="${3:-6000}"
if ! command -v chromium >/dev/null 2>&1; then
  echo "installing Debian's chromium package" >&2
  if [ "$(id -u)" -eq 0 ]; then apt-get update -qq && apt-get install -y -qq chromium >/dev/null
  else sudo apt-get update -qq && sudo apt-get install -y -qq chromium >/dev/null; fi
fi
abs="$(cd "$(dirname "$report")" && pwd)/$(basename "$report")"
chromium --headless --no-sandbox --disable-gpu --hide-scrollbars \
  --window-size=1000,"$height" --screenshot="$shot" "file://$abs" 2>/dev/null
test -s "$shot"
echo "screenshot: $shot"
