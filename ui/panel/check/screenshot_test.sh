#!/bin/sh
# Headless panel test, under Xvfb with Mesa's software renderer:
#  1. a demo database's live view, checked against the stored samples
#     (the voltage trace where the samples map, the cutoff at its level);
#  2. real simulated runs (kp_panel_bench_runs) in each state the panel
#     shows -- running, paused, aborted, completed -- and the compare view
#     with four runs, in both palettes: every plot shows its background,
#     drawn pixels and each trace's colour, and the state badge reads the
#     run's state in its colour;
#  3. the bench overview of the demo's four-channel batch: four tiles, each
#     on its background with its state colour.
# Usage: screenshot_test.sh KNEEPOINT PNG_CHECK BENCH_RUNS WORKDIR
set -eu
kneepoint=$1
check=$2
bench=$3
work=$4
rm -rf "$work"
mkdir -p "$work"
"$kneepoint" demo --db "$work/demo.db" >"$work/demo.log" 2>&1 || { cat "$work/demo.log"; exit 1; }

# Real runs of the simulated bench: four that ended, then one paused and one
# running whose runner processes stay alive (so nothing marks them
# interrupted) until the pictures are taken.
db="$work/states.db"
for mode in completed aborted cycling slow; do
  "$bench" "$db" "$mode" >>"$work/bench.log" 2>&1 || { cat "$work/bench.log"; exit 1; }
done
pids=""
trap 'for p in $pids; do kill "$p" 2>/dev/null || true; done' EXIT
for mode in paused running; do
  "$bench" "$db" "$mode" >"$work/$mode.out" 2>&1 &
  pids="$pids $!"
  i=0
  until grep -q ready "$work/$mode.out"; do
    i=$((i + 1))
    if [ "$i" -gt 600 ]; then cat "$work/$mode.out"; echo "bench run '$mode' did not get ready"; exit 1; fi
    sleep 0.1
  done
done

# Under `make sanitize` the panel process keeps ASan and UBSan but not
# LeakSanitizer: Mesa's software GL driver is unloaded at exit and leaves
# blocks that LSan can only attribute to "<unknown module>", so no suppression
# can name them. The panel's own code is leak-checked by tests/ui
# (HeadlessPanel draws the whole panel without a GL context); the demo run
# above is checked in full.
panel_asan="${ASAN_OPTIONS:+$ASAN_OPTIONS:}detect_leaks=0"
export ASAN_OPTIONS="$panel_asan"
# One X server for every picture.
cat >"$work/shots.sh" <<SHOTS
set -eu
"$kneepoint" view --db "$work/demo.db" --run 1 --screenshot "$work/panel.png" --size 1600x1000 --frames 4 --layout-out "$work/layout.json"
shot() { name=\$1; shift; "$kneepoint" view --db "$db" --screenshot "$work/\$name.png" --size 1280x800 --frames 3 --layout-out "$work/\$name.json" "\$@"; }
shot running --run 6
shot paused --run 5 --light
shot aborted --run 2
shot completed --run 1 --light
shot compare-night --tab compare --compare 1,2,3,4
shot compare-day --tab compare --compare 1,2,3,4 --light
"$kneepoint" view --db "$work/demo.db" --tab bench --screenshot "$work/bench.png" --size 1280x800 --frames 3 --layout-out "$work/bench.json"
SHOTS
xvfb-run -a -s '-screen 0 1600x1000x24' sh "$work/shots.sh"
"$check" "$work/panel.png" "$work/layout.json" "$work/demo.db" 1 1600 1000
"$check" --elements "$work/running.png" "$work/running.json" 1280 800 RUNNING 3
"$check" --elements "$work/paused.png" "$work/paused.json" 1280 800 PAUSED 3
"$check" --elements "$work/aborted.png" "$work/aborted.json" 1280 800 ABORTED 3
"$check" --elements "$work/completed.png" "$work/completed.json" 1280 800 COMPLETED 3
"$check" --elements "$work/compare-night.png" "$work/compare-night.json" 1280 800 - 3
"$check" --elements "$work/compare-day.png" "$work/compare-day.json" 1280 800 - 3
"$check" --elements "$work/bench.png" "$work/bench.json" 1280 800 - 0 4
