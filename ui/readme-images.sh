#!/bin/sh
# Regenerates the pictures README.md shows, from fresh demo runs:
#   ui/docs/panel-*.png    the panel (ui/screenshot.sh, headless Xvfb)
#   ui/docs/report-*.png   the HTML pages (ui/report-pictures.sh, headless Chromium)
# Run from the repository root after a build:  ui/readme-images.sh [BUILD_DIR]
set -eu
here=$(cd "$(dirname "$0")" && pwd)
"$here/screenshot.sh" "${1:-build}"
"$here/report-pictures.sh" "${1:-build}"
