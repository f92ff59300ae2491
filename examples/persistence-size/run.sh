#!/usr/bin/env bash
# Flash (.text) and RAM cost of the persistence layer on a Cortex-M4F (thumbv7em-none-eabihf),
# release, opt-level "z", LTO. Needs binutils-arm-none-eabi (size, nm) and, for the stack
# probe, qemu-system-arm; installs them with apt-get when missing.
set -euo pipefail
cd "$(dirname "$0")"
need() { command -v arm-none-eabi-size >/dev/null && command -v arm-none-eabi-nm >/dev/null && command -v qemu-system-arm >/dev/null; }
if ! need; then
  (apt-get update -qq && apt-get install -y -qq binutils-arm-none-eabi qemu-system-arm) >/dev/null 2>&1 || true
fi
if ! need; then
  echo "SKIPPED: binutils-arm-none-eabi / qemu-system-arm not available; persistence size not measured"
  exit 0
fi
cargo build --quiet --release
dir="${CARGO_TARGET_DIR:-target}/thumbv7em-none-eabihf/release"
for b in baseline store store_csv store_session; do
  timeout 120 qemu-system-arm -cpu cortex-m4 -machine mps2-an386 -nographic -monitor none -serial none \
    -semihosting-config enable=on,target=native -kernel "$dir/$b" || { echo "FAIL: probe $b"; exit 1; }
done
text() { arm-none-eabi-size -A "$1" | awk '$1 == ".text" || $1 == ".rodata" { s += $2 } END { print s }'; }
base=$(text "$dir/baseline")
echo "-- flash (.text + .rodata), thumbv7em-none-eabihf, opt-level z, LTO"
echo "baseline (flash driver + calibration fit): $base B"
prev=$base
for b in store store_csv store_session; do
  t=$(text "$dir/$b")
  echo "$b: $t B (+$((t - base)) B over baseline, +$((t - prev)) B over the previous probe)"
  prev=$t
done
echo "-- RAM"
timeout 120 qemu-system-arm -cpu cortex-m4 -machine mps2-an386 -nographic -monitor none -serial none \
  -semihosting-config enable=on,target=native -kernel "$dir/stack"
