#!/usr/bin/env bash
# Links the bare-metal program in src/main.rs for thumbv7em-none-eabihf in
# release. A reachable panic in the control path leaves a call to the undefined
# `control_path_reached_a_panic`, and the link fails.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
cd "$here"
if cargo build --release --locked 2>build.log; then
  elf=target/thumbv7em-none-eabihf/release/no-panic-link
  echo "no-panic link check: passed ($(wc -c <"$elf") bytes ELF, no panic path reachable)"
  rm -f build.log
else
  if grep -q control_path_reached_a_panic build.log; then
    echo "no-panic link check: FAILED, a panic is reachable from the control path:" >&2
  else
    echo "no-panic link check: FAILED to build:" >&2
  fi
  grep -E 'error|undefined|control_path' build.log | head -20 >&2
  exit 1
fi
