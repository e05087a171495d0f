#!/usr/bin/env bash
# Every check the project has, in the order a failure is cheapest to find.
# This is the README's test command and what .ci/run calls. Needs: the pinned toolchain with
# the thumbv7em-none-eabihf target (.ci/run installs what a fresh machine lacks).
set -euo pipefail
cd "$(dirname "$0")/.."

step() { printf '\n==> %s\n' "$*"; }

step "format"
cargo fmt --all --check

step "clippy, host, every target of every crate"
cargo clippy --workspace --all-targets --locked -- -D warnings

step "clippy, no_std crates on thumbv7em-none-eabihf (with and without defmt)"
cargo clippy -p holdback-core -p holdback-firmware --target thumbv7em-none-eabihf --locked -- -D warnings
cargo clippy -p holdback-core -p holdback-firmware --target thumbv7em-none-eabihf --locked --features holdback-core/defmt,holdback-firmware/defmt -- -D warnings

step "build holdback-core for thumbv7em-none-eabihf (no std), release"
cargo build -p holdback-core --target thumbv7em-none-eabihf --release --locked

step "docs build without warnings"
RUSTDOCFLAGS="-D warnings" cargo doc --workspace --no-deps --locked --quiet

step "host tests"
cargo test --workspace --locked

step "benchmarks compile (run them with: cargo bench -p holdback-tests)"
cargo bench -p holdback-tests --no-run --locked --quiet
