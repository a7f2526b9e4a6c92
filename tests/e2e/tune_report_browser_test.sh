#!/usr/bin/env bash
# End-to-end: the HTML report in a real browser (Debian's chromium, headless)
# and the PNG export of one series' plot (rsvg-convert from librsvg2-bin).
# Checks: no console messages at all (our script logs nothing, so any line is
# an error or warning), every series panel drawn, a screenshot written.
# Usage: tune_report_browser_test.sh TALLYD SOURCE_DIR
# Set TALLYD_SCREENSHOT_DIR to keep the screenshot and the PNG.
set -euo pipefail
tallyd=$1
src=$2
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }
command -v chromium >/dev/null || fail "chromium not installed (config/packages-test.txt lists it)"
command -v rsvg-convert >/dev/null || fail "rsvg-convert not installed (librsvg2-bin in config/packages-test.txt)"

browse() {  # browse PAGE OUT_PREFIX [extra chromium flags...]
  local page=$1 out=$2
  shift 2
  timeout 120 chromium --headless --no-sandbox --disable-gpu --disable-background-networking \
    --disable-component-update --disable-sync --no-first-run --user-data-dir="$tmp/profile-$(basename "$out")" \
    --enable-logging=stderr --v=0 --virtual-time-budget=20000 "$@" "file://$page" >"$out.dom" 2>"$out.log"
}

# --- 0. The console check can fail: a page that throws is caught.
printf '<!DOCTYPE html><html><body><script>null.f();</script></body></html>\n' > "$tmp/throws.html"
browse "$tmp/throws.html" "$tmp/throws" --dump-dom
grep -q "CONSOLE" "$tmp/throws.log" || fail "the console check does not see an uncaught error"

# --- 1. The demo moth-trap report: 24 traps, known episodes shaded.
"$tallyd" replay "$src/demo_feeds/moth_traps.csv" --config "$src/config/moth_traps.toml" \
  --events "$src/demo_feeds/events.csv" --alerts "$tmp/alerts.jsonl" -q --report "$tmp/report.html" \
  --plot-series orchard-s02 --plot-file "$tmp/orchard-s02.svg" || fail "replay with --report"
series=$(tail -n +6 "$src/demo_feeds/moth_traps.csv" | cut -d, -f2 | sort -u | wc -l)
[[ $series -eq 24 ]] || fail "expected 24 traps in the demo feed, found $series"
# Self-contained: nothing fetched (the only URL is the SVG namespace name, which is never fetched).
if grep -oE "(src|href)=['\"]?[a-z]+:" "$tmp/report.html" | grep -v "href='#" | head -1 | grep -q .; then
  fail "the report references an outside resource"
fi

browse "$tmp/report.html" "$tmp/report" --dump-dom
if grep -q "CONSOLE" "$tmp/report.log"; then grep "CONSOLE" "$tmp/report.log" >&2; fail "console messages in the report"; fi
grep -q "data-panels-drawn=\"$series\"" "$tmp/report.dom" || fail "the script did not finish drawing $series panels"
drawn=$(grep -o '<section class="panel"[^>]*data-drawn="1"' "$tmp/report.dom" | wc -l)
[[ $drawn -eq $series ]] || fail "expected $series drawn panels, found $drawn"
plots=$(grep -o 'observed counts, expected count and predictive band</title>' "$tmp/report.dom" | wc -l)
[[ $plots -ge $series ]] || fail "expected $series plots in the DOM, found $plots"

browse "$tmp/report.html" "$tmp/shot" --screenshot="$tmp/report.png" --window-size=1000,1600 --hide-scrollbars
[[ -s "$tmp/report.png" ]] || fail "no screenshot"
[[ $(head -c 8 "$tmp/report.png" | od -An -tx1 | tr -d ' \n') == 89504e470d0a1a0a ]] || fail "screenshot is not a PNG"

# --- 2. PNG export of one series' plot.
grep -q "known episode" "$tmp/orchard-s02.svg" || fail "orchard-s02's plot lacks its known episode"
rsvg-convert -o "$tmp/orchard-s02.png" "$tmp/orchard-s02.svg" || fail "rsvg-convert refused the plot"
python3 - "$tmp/orchard-s02.png" <<'PY' || fail "exported PNG"
import struct, sys
data = open(sys.argv[1], "rb").read()
assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
w, h = struct.unpack(">II", data[16:24])  # IHDR width and height (PNG spec, W3C 2003, section 11.2.2)
assert w == 760 and 250 <= h <= 400, (w, h)
PY

if [[ -n "${TALLYD_SCREENSHOT_DIR:-}" ]]; then
  cp "$tmp/report.png" "$tmp/orchard-s02.png" "$TALLYD_SCREENSHOT_DIR/"
fi
echo "tune_report_browser_test: ok ($drawn panels drawn)"
