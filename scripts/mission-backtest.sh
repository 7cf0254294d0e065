#!/usr/bin/env bash
# The mission projection's back-test (slow; not part of test-all.sh): for
# every example spec and the demo, the first tenth of a run is projected to
# the whole run and compared with it, and the demo's 30-day verdict is taken
# from 1, 3 and 10 hours. docs/mission.md records its tables. A few minutes
# in a release build on a 2-core machine.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo test --release -p cairn-host-check --test mission -- --ignored --nocapture \
  backtest_the_first_tenth_against_the_whole_run
