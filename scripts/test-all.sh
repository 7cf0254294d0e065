#!/usr/bin/env bash
# The one test entry point: what CI runs and what the README's test command runs.
# It installs what it needs on a fresh machine, then runs every check in order.
set -euo pipefail
cd "$(dirname "$0")/.."

step() { printf '\n== %s\n' "$*"; }

step "set-up: thumbv7em-none-eabihf target and qemu-system-arm"
rustup target add thumbv7em-none-eabihf
if ! command -v qemu-system-arm >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm >/dev/null
  else
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm >/dev/null
  fi
fi

step "format"
cargo fmt --all --check

step "lint"
cargo clippy --workspace --all-targets --locked -- -D warnings

step "docs"
RUSTDOCFLAGS="-D warnings" cargo doc --workspace --no-deps --locked

step "no_std core for thumbv7em-none-eabihf (release)"
cargo build -p cairn-core --release --target thumbv7em-none-eabihf --locked
cargo build -p cairn-core --release --target thumbv7em-none-eabihf --features fast-trig,defmt --locked

step "example user crates for thumbv7em-none-eabihf (release)"
cargo build -p bramble-tug --release --target thumbv7em-none-eabihf --locked
cargo build -p skerry-sled --release --target thumbv7em-none-eabihf --locked

step "tests"
cargo test --workspace --locked
