#!/usr/bin/env bash
# Builds the firmware example for Cortex-M4F and reports its flash and RAM.
set -euo pipefail
cd "$(dirname "$0")"
cargo build --release --locked --target thumbv7em-none-eabihf
python3 size.py target/thumbv7em-none-eabihf/release/firmware-example
