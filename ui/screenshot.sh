#!/bin/sh
# Regenerates the panel pictures used in README.md, headless (Xvfb + Mesa's
# software renderer), from real runs of the simulated bench in virtual time
# (kp_panel_bench_runs: the run controller on the built-in simulator):
#   ui/docs/panel-live.png         a running discharge, night palette
#   ui/docs/panel-live-light.png   a paused run, day palette
#   ui/docs/panel-aborted.png      an aborted run: badge, reason, "load off"
#   ui/docs/panel-compare.png      four runs compared (one of them cycling)
# Run from the repository root after a build:  ui/screenshot.sh [BUILD_DIR]
set -eu
build=$(cd "${1:-build}" && pwd)
kp=$build/kneepoint
bench=$build/ui/kp_panel_bench_runs
here=$(cd "$(dirname "$0")" && pwd)
work=$(mktemp -d)
pids=""
trap 'for p in $pids; do kill "$p" 2>/dev/null || true; done; rm -rf "$work"' EXIT
cd "$work"
db=lab.db  # relative: the panel's title bar shows this name
for mode in completed aborted cycling slow; do
  "$bench" "$db" "$mode" >/dev/null
done
# The paused and the running run keep their runner process alive while the
# pictures are taken.
for mode in paused running; do
  "$bench" "$db" "$mode" >"$mode.out" 2>&1 &
  pids="$pids $!"
  until grep -q ready "$mode.out"; do sleep 0.1; done
done
xvfb-run -a -s '-screen 0 1600x1000x24' sh -c "
  set -e
  '$kp' view --db '$db' --run 6 --screenshot '$here/docs/panel-live.png' --size 1600x1000 --frames 4
  '$kp' view --db '$db' --run 5 --light --screenshot '$here/docs/panel-live-light.png' --size 1600x1000 --frames 4
  '$kp' view --db '$db' --run 2 --screenshot '$here/docs/panel-aborted.png' --size 1600x1000 --frames 4
  '$kp' view --db '$db' --tab compare --compare 1,2,3,4 --screenshot '$here/docs/panel-compare.png' --size 1600x1000 --frames 4
"
