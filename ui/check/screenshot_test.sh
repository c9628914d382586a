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
# Under `make sanitize` the panel process keeps ASan and UBSan but not
# LeakSanitizer: Mesa's software GL driver is unloaded at exit and leaves
# blocks that LSan can only attribute to "<unknown module>", so no suppression
# can name them. The panel's own code is leak-checked by tests/ui
# (HeadlessPanel draws the whole panel without a GL context); the demo run
# above is checked in full.
panel_asan="${ASAN_OPTIONS:+$ASAN_OPTIONS:}detect_leaks=0"
ASAN_OPTIONS=$panel_asan xvfb-run -a -s '-screen 0 1600x1000x24' "$kneepoint" view --db "$work/demo.db" --run 1 \
  --screenshot "$work/panel.png" --size 1600x1000 --frames 4 --layout-out "$work/layout.json"
"$check" "$work/panel.png" "$work/layout.json" "$work/demo.db" 1 1600 1000
