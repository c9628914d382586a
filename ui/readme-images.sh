#!/bin/sh
# Regenerates the two pictures README.md shows, from a fresh demo run:
#   ui/docs/panel-live.png        the panel (via ui/screenshot.sh, headless Xvfb)
#   ui/docs/report-overlay.png    the first plot of the demo's comparison page
#                                 (its inline SVG, rendered by rsvg-convert from
#                                 librsvg2-bin)
# Run from the repository root after a build:  ui/readme-images.sh [BUILD_DIR]
set -eu
build=$(cd "${1:-build}" && pwd)
here=$(cd "$(dirname "$0")" && pwd)
"$here/screenshot.sh" "$build"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$work"
"$build/kneepoint" demo --db demo.db --report-dir report >/dev/null
# The first <svg>...</svg> of the comparison page: the discharge overlay.
perl -0777 -ne 'if (/(<svg\b.*?<\/svg>)/s) { print $1 } else { exit 1 }' report/compare-product-load.html > overlay.svg
rsvg-convert --background-color=white --zoom=1.5 -o "$here/docs/report-overlay.png" overlay.svg
echo "wrote $here/docs/panel-live.png, $here/docs/panel-live-light.png and $here/docs/report-overlay.png"
