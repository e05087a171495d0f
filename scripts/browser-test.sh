#!/usr/bin/env bash
# The fleet report in a real headless browser: Debian's chromium + chromium-driver (installed
# when missing), driven over WebDriver on a loopback port by the `#[ignore]`d Rust test
# `host-sim/review/tests/browser.rs` (page loads without JS errors, every pond listed, a
# storm plot present, a header click sorts).
set -euo pipefail
cd "$(dirname "$0")/.."
export DEBIAN_FRONTEND=noninteractive
if ! command -v chromium >/dev/null || ! command -v chromedriver >/dev/null; then
    sudo=()
    [[ $(id -u) -eq 0 ]] || sudo=(sudo)
    "${sudo[@]}" apt-get update -q
    "${sudo[@]}" apt-get install -y -q chromium chromium-driver
fi
chromium --version
export HOLDBACK_CHROMIUM
HOLDBACK_CHROMIUM=$(command -v chromium)
export HOLDBACK_CHROMEDRIVER
HOLDBACK_CHROMEDRIVER=$(command -v chromedriver)
cargo test -p holdback-review --test browser --locked -- --ignored
