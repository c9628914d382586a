#!/bin/sh
# Headless panel test: builds a demo database, renders the live view under
# Xvfb (Mesa software renderer) to a PNG, then checks the picture against the
# stored samples. Usage: screenshot_test.sh KNEEPOINT PNG_CHECK WORKDIR
set -eu
kneepoint=$1
check=$2
work=$3
rm -rf "$work"
mkdir -p "$work"
"$kneepoint" demo --db "$work/demo.db" >"$work/demo.log" 2>&1 || { cat "$work/demo.log"; exit 1; }
xvfb-run -a -s '-screen 0 1600x1000x24' "$kneepoint" view --db "$work/demo.db" --run 1 \
  --screenshot "$work/panel.png" --size 1600x1000 --frames 4 --layout-out "$work/layout.json"
"$check" "$work/panel.png" "$work/layout.json" "$work/demo.db" 1 1600 1000
