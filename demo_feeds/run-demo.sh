#!/usr/bin/env bash
# The demo: installs the build packages (as root), builds tallyd, and replays
# the bundled demo feeds, printing every alert.
#   sudo bash demo_feeds/run-demo.sh
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
bash "$root/config/install-packages.sh" packages-build.txt
build="${TALLYD_BUILD_DIR:-$root/build}"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$build" -j"$(nproc)" --target tallyd
out="$build/demo"
mkdir -p "$out"

for scenario in moth_traps sensor_counts; do
  echo
  echo "== $scenario: replaying demo_feeds/$scenario.csv with config/$scenario.toml"
  "$build/tallyd" replay "$root/demo_feeds/$scenario.csv" --config "$root/config/$scenario.toml" \
    --alerts "$out/${scenario}_alerts.jsonl" --rejects "$out/${scenario}_rejects.txt"
  echo "alerts (JSON Lines): $out/${scenario}_alerts.jsonl"
done
echo
echo "These are statistical signals to be confirmed in the field; local regulations and licensed practitioners decide."
