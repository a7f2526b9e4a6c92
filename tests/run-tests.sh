#!/usr/bin/env bash
# The test command: installs what the tests need (Debian packages, as root),
# builds everything in Release mode and runs the whole suite with ctest.
#   sudo bash tests/run-tests.sh
# TALLYD_BUILD_DIR overrides the build folder (default: build/ at the top).
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
bash "$root/config/install-packages.sh" packages-build.txt packages-test.txt
build="${TALLYD_BUILD_DIR:-$root/build}"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$build" -j"$(nproc)"
ctest --test-dir "$build" --output-on-failure -j"$(nproc)"
