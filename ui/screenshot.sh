#!/bin/sh
# Regenerates the panel pictures used in README.md from a fresh demo database,
# headless (Xvfb + Mesa's software renderer). Run from the repository root
# after a build:  ui/screenshot.sh [BUILD_DIR]
set -eu
kp=$(cd "${1:-build}" && pwd)/kneepoint
here=$(cd "$(dirname "$0")" && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$work"
"$kp" demo >/dev/null
xvfb-run -a -s '-screen 0 1600x1000x24' "$kp" view --db kneepoint-demo.db --run 1 \
  --screenshot "$here/docs/panel-live.png" --size 1600x1000 --frames 4
xvfb-run -a -s '-screen 0 1600x1000x24' "$kp" view --db kneepoint-demo.db --run 1 --light \
  --screenshot "$here/docs/panel-live-light.png" --size 1600x1000 --frames 4
