#!/usr/bin/env bash
# Times the built-in demo check (one hour of odometry at 200 Hz, every
# variant plus the double-double reference) in release, three runs.
# A measurement, not a test: the README records the figure.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release -p cairn-host-check --locked
TIMEFORMAT='%R s wall, %U s user'
for i in 1 2 3; do
  printf 'run %d: ' "$i"
  time (./target/release/cairn --quiet --no-progress >/dev/null || true)
done
