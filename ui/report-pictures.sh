#!/bin/sh
# Renders each kind of HTML page Kneepoint writes, from a fresh demo run, in
# headless Chromium, and stores the pictures under ui/docs/:
#   report-run-capacity.png   a rated-capacity run (verdict, summary, plots)
#   report-run-pulsed.png     a pulse-train run (envelopes, current strip)
#   report-run-aborted.png    an aborted run (abort mark, limit lines)
#   report-compare.png        the comparison of the product-load runs
#   report-index.png          the demo campaign's index page
#   report-overlay.png        the comparison page's first plot (README picture)
# Chromium comes from Debian (package chromium); this script installs it when
# it is missing (dpkg check, apt-get update only then). `make test` never
# needs it. Run from the repository root after a build:
#   ui/report-pictures.sh [BUILD_DIR]
set -eu
build=$(cd "${1:-build}" && pwd)
here=$(cd "$(dirname "$0")" && pwd)
sudo=""; [ "$(id -u)" = 0 ] || sudo=sudo
if ! dpkg-query -W -f='${Status}' chromium 2>/dev/null | grep -q "install ok installed"; then
  echo "report-pictures: installing Debian package chromium"
  $sudo apt-get update && DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y --no-install-recommends chromium
fi
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$work"
"$build/kneepoint" demo --db demo.db --report-dir report >/dev/null
# page file -> picture, window height per page kind
shot() {
  page=$1 out=$2 height=$3
  [ -f "report/$page" ] || { echo "report-pictures: no page $page in the demo report" >&2; exit 1; }
  chromium --headless --no-sandbox --disable-gpu --hide-scrollbars --force-device-scale-factor=1 \
    --window-size=1200,"$height" --screenshot="$here/docs/$out" "file://$work/report/$page" 2>/dev/null
  echo "wrote $here/docs/$out"
}
run_page() {  # the report page of the demo run whose row in the index names $1
  perl -ne 'if (/<td class="t">\Q'"$1"'\E<\/td>.*?href="([^"]+)"/) { print $1; exit }' report/index.html
}
shot "$(run_page 'Q1 rated capacity')" report-run-capacity.png 5200
shot "$(run_page 'Q2 pulses at 2 A')" report-run-pulsed.png 5200
shot "$(run_page 'Q6 failing cell')" report-run-aborted.png 4600
shot compare-product-load.html report-compare.png 1700
shot index.html report-index.png 1400
# The README's overlay picture: the comparison page's first plot alone.
perl -0777 -ne 'if (/(<svg\b.*?<\/svg>)/s) { print "<html><body style=\"margin:0;background:#fff\">$1</body></html>" } else { exit 1 }' \
  report/compare-product-load.html > overlay.html
chromium --headless --no-sandbox --disable-gpu --hide-scrollbars --window-size=1000,380 \
  --screenshot="$here/docs/report-overlay.png" "file://$work/overlay.html" 2>/dev/null
echo "wrote $here/docs/report-overlay.png"
