#!/bin/sh
# Shows the lab web view (`kneepoint serve`) in headless Chromium and stores
# the picture as ui/docs/lab-view.png: a throw-away PostgreSQL from Debian
# (initdb into a temporary folder, Unix socket only, as user postgres when
# run as root), the demo campaign synced into it, one simulated run going on
# with `run --sync` (the live channel), then the page.
# Needs Debian's postgresql and chromium (installed when missing); `make test`
# never needs this script. Run from the repository root after a build:
#   ui/lab-pictures.sh [BUILD_DIR]
set -eu
build=$(cd "${1:-build}" && pwd)
here=$(cd "$(dirname "$0")" && pwd)
sudo=""; [ "$(id -u)" = 0 ] || sudo=sudo
for pkg in postgresql chromium; do
  if ! dpkg-query -W -f='${Status}' $pkg 2>/dev/null | grep -q "install ok installed"; then
    echo "lab-pictures: installing Debian package $pkg"
    $sudo apt-get update && DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y --no-install-recommends $pkg
  fi
done
pgbin=$(ls -d /usr/lib/postgresql/*/bin | sort -V | tail -1)
work=$(mktemp -d)
as_pg=""
if [ "$(id -u)" = 0 ]; then chown postgres "$work"; as_pg="runuser -u postgres --"; fi
chmod 700 "$work"
run_pid="" serve_pid=""
cleanup() {
  [ -n "$serve_pid" ] && kill "$serve_pid" 2>/dev/null || true
  [ -n "$run_pid" ] && kill "$run_pid" 2>/dev/null && wait "$run_pid" 2>/dev/null || true
  $as_pg "$pgbin/pg_ctl" -D "$work/pg" -w -s -m fast stop >/dev/null 2>&1 || true
  rm -rf "$work"
}
trap cleanup EXIT
$as_pg "$pgbin/initdb" -D "$work/pg" -A trust -U postgres -E UTF8 --locale=C --no-sync >/dev/null
$as_pg "$pgbin/pg_ctl" -D "$work/pg" -l "$work/pg.log" -w -s -o "-k $work -p 5432 -c listen_addresses=''" start
lab="postgresql:///postgres?host=$work&port=5432&user=postgres"
mkdir "$work/bench" && cd "$work/bench"
"$build/kneepoint" demo --db demo.db >/dev/null
"$build/kneepoint" sync --db demo.db --to "$lab"
# A run going on while the picture is taken: a 1C discharge at 30x speed.
cat > live.kpp <<'PROC'
name "incoming 1C"
cell li-ion rated=2500mAh nominal=3.6V max=4.2V cutoff=2.75V max-temp=60degC
discharge 1C until voltage<=2.75V every=2s
PROC
"$build/kneepoint" run live.kpp --rig sim --db live.db --speed 30 --bench "bench 7" --cell "LX-0412" --serial "LX-0412" \
  --sync "$lab" >/dev/null 2>&1 &
run_pid=$!
port=$(python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])')
"$build/kneepoint" serve --db "$lab" --listen "127.0.0.1:$port" >/dev/null &
serve_pid=$!
sleep 12
chromium --headless --no-sandbox --disable-gpu --hide-scrollbars --force-device-scale-factor=1 --window-size=1280,1100 \
  --virtual-time-budget=6000 --screenshot="$here/docs/lab-view.png" "http://127.0.0.1:$port/" 2>/dev/null
echo "wrote $here/docs/lab-view.png"
