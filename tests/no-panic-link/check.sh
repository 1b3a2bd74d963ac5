#!/usr/bin/env bash
# Links the bare-metal program in src/main.rs in release for Cortex-M4F
# (thumbv7em-none-eabihf) and Cortex-M0 (thumbv6m-none-eabi). A reachable panic
# in any call it makes leaves a call to the undefined
# `control_path_reached_a_panic`, and the link fails.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
cd "$here"
for target in thumbv7em-none-eabihf thumbv6m-none-eabi; do
  if cargo build --release --locked --target "$target" 2>build.log; then
    elf=target/$target/release/no-panic-link
    echo "no-panic link check ($target): passed ($(wc -c <"$elf") bytes ELF, no panic path reachable)"
    rm -f build.log
  else
    if grep -q control_path_reached_a_panic build.log; then
      echo "no-panic link check ($target): FAILED, a panic is reachable:" >&2
    else
      echo "no-panic link check ($target): FAILED to build:" >&2
    fi
    grep -E 'error|undefined|control_path' build.log | head -20 >&2
    exit 1
  fi
done
