#!/usr/bin/env bash
# Budgets of the calibration layer (not part of CI; run by hand, figures go into the rustdoc of
# `lumisorb::calibration`):
#  1. flash: .text of a bare-metal thumbv7em-none-eabihf image with and without a calibration
#     (needs arm-none-eabi binutils: `apt-get install binutils-arm-none-eabi`);
#  2. instructions: callgrind count of one 16-point fit with its statistics (needs valgrind);
#  3. RAM: size_of::<Calibration<16>>() (the unit test prints it).
set -euo pipefail
cd "$(dirname "$0")/.."
root=$(pwd)
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$root/target}"

echo "== flash (thumbv7em-none-eabihf, opt-level s, LTO)"
probe="$root/budgets/calibration-flash"
out="$CARGO_TARGET_DIR/calibration-flash"
(cd "$probe" && CARGO_TARGET_DIR="$out" cargo build --release --target thumbv7em-none-eabihf -q)
cp "$out/thumbv7em-none-eabihf/release/calibration-flash" "$out/baseline.elf"
(cd "$probe" && CARGO_TARGET_DIR="$out" cargo build --release --target thumbv7em-none-eabihf -q --features calibration)
cp "$out/thumbv7em-none-eabihf/release/calibration-flash" "$out/calibration.elf"
arm-none-eabi-size "$out/baseline.elf" "$out/calibration.elf"
base=$(arm-none-eabi-size -A "$out/baseline.elf" | awk '$1==".text"{print $2}')
cal=$(arm-none-eabi-size -A "$out/calibration.elf" | awk '$1==".text"{print $2}')
ro_base=$(arm-none-eabi-size -A "$out/baseline.elf" | awk '$1==".rodata"{s+=$2} END{print s+0}')
ro_cal=$(arm-none-eabi-size -A "$out/calibration.elf" | awk '$1==".rodata"{s+=$2} END{print s+0}')
echo "calibration flash cost: .text $((cal - base)) bytes, .rodata $((ro_cal - ro_base)) bytes"
echo "largest symbols of the calibration image:"
arm-none-eabi-nm --size-sort -S -C -t d "$out/calibration.elf" | tail -25

echo "== instructions (callgrind, host release build)"
cargo build --release --example calibration_bench -q
bench="$CARGO_TARGET_DIR/release/examples/calibration_bench"
for model in origin linear quadratic; do
  valgrind --tool=callgrind --callgrind-out-file="$CARGO_TARGET_DIR/callgrind.calibration.$model" \
    --toggle-collect='calibration_bench::fit_and_statistics*' "$bench" "$model" 2>&1 |
    awk -v m="$model" '/Collected/{print m ": " $NF " instructions for one 16-point fit with statistics + 1 quantification"}'
done

echo "== RAM"
cargo test --lib -q calibration::curve::tests::sixteen_point -- --nocapture 2>&1 | grep size_of
