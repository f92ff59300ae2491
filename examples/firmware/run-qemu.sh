#!/usr/bin/env bash
# Firmware on emulated boards: builds examples/firmware for mps2-an386 (Cortex-M4F,
# thumbv7em-none-eabihf) and microbit (Cortex-M0, thumbv6m-none-eabi), runs both under QEMU
# with semihosting, compares their printed results with the host library's on the same
# simulated counts (digit for digit), and prints the size and stack report.
#
# Fails when a board's run fails (its own checks), when its results differ from the host's,
# or when a flash, static-RAM or stack budget is exceeded (see DEVELOPERS.md, "Firmware on an
# emulated board").
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
root="$(cd "$here/../.." && pwd)"
target_dir="${CARGO_TARGET_DIR:-$here/target}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

# Budgets (bytes).
FLASH_BUDGET=32768      # the pipeline, thumbv7em-none-eabihf, no formatting
STATIC_RAM_BUDGET=4096  # .data + .bss + .uninit, thumbv7em-none-eabihf
STACK_BUDGET=2048       # one full measurement (auto-exposure, blank, sample)

need_tools() {
  command -v qemu-system-arm >/dev/null && command -v arm-none-eabi-size >/dev/null &&
    command -v arm-none-eabi-nm >/dev/null
}
if ! need_tools; then
  echo "installing qemu-system-arm and binutils-arm-none-eabi"
  if ! { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
    --no-install-recommends qemu-system-arm binutils-arm-none-eabi; } >"$work/apt.log" 2>&1; then
    tail -5 "$work/apt.log"
    echo "SKIPPED: apt-get could not install qemu-system-arm / binutils-arm-none-eabi; firmware not run on emulated boards"
    exit 0
  fi
fi
for t in thumbv7em-none-eabihf thumbv6m-none-eabi; do
  if ! rustup target list --installed 2>/dev/null | grep -qx "$t" &&
    ! timeout 300 rustup target add "$t" >/dev/null 2>&1; then
    echo "SKIPPED: rustup could not add target $t; firmware not run on emulated boards"
    exit 0
  fi
done

echo "-- host library, same pipeline source and seed"
(cd "$root" && cargo run -q --features sim --example firmware_pipeline) >"$work/host.txt"

fail=0
run_board() { # board target cpu
  local board=$1 target=$2 cpu=$3
  echo "-- $board ($target): build from inside examples/firmware"
  (cd "$here" && cargo build -q --release --bins --target "$target")
  local elf="$target_dir/$target/release/lumisorb-firmware"
  local status=0
  timeout 300 qemu-system-arm -cpu "$cpu" -machine "$board" -nographic -monitor none -serial none \
    -semihosting-config enable=on,target=native -kernel "$elf" >"$work/$board.txt" || status=$?
  cat "$work/$board.txt"
  if [ "$status" -ne 0 ]; then
    echo "FAIL: $board run exited with status $status"
    fail=1
  fi
  if grep -v '^board \|^stack ' "$work/$board.txt" | diff -u "$work/host.txt" - >"$work/$board.diff"; then
    echo "$board: results equal to the host library's, digit for digit"
  else
    cat "$work/$board.diff"
    echo "FAIL: $board results differ from the host library's"
    fail=1
  fi
  # The probes without formatting must pass too (their exit status is their only output).
  for probe in size_probe size_probe_measure; do
    status=0
    timeout 300 qemu-system-arm -cpu "$cpu" -machine "$board" -nographic -monitor none -serial none \
      -semihosting-config enable=on,target=native -kernel "$target_dir/$target/release/$probe" \
      >/dev/null || status=$?
    if [ "$status" -ne 0 ]; then
      echo "FAIL: $board $probe exited with status $status"
      fail=1
    fi
  done
}
run_board mps2-an386 thumbv7em-none-eabihf cortex-m4
run_board microbit thumbv6m-none-eabi cortex-m0

echo "-- mps2-an386 with the sequencer's defmt event log (feature defmt, DEFMT_LOG=debug)"
defmt_dir="$target_dir/defmt-variant"
(cd "$here" && DEFMT_LOG=debug CARGO_TARGET_DIR="$defmt_dir" cargo build -q --release --features defmt \
  --bin lumisorb-firmware --target thumbv7em-none-eabihf)
defmt_elf="$defmt_dir/thumbv7em-none-eabihf/release/lumisorb-firmware"
status=0
timeout 300 qemu-system-arm -cpu cortex-m4 -machine mps2-an386 -nographic -monitor none -serial none \
  -semihosting-config enable=on,target=native -kernel "$defmt_elf" >"$work/defmt.bin" || status=$?
events=$(arm-none-eabi-nm "$defmt_elf" | grep -c '"tag":"defmt_debug"' || true)
echo "defmt variant: exit status $status, $events sequencer event formats interned, $(wc -c <"$work/defmt.bin") bytes of output (text lines and binary defmt frames)"
if [ "$status" -ne 0 ] || [ "$events" -eq 0 ]; then
  echo "FAIL: the defmt variant did not run or logs no sequencer events"
  fail=1
fi

section() { # elf name -> size of section (0 when absent)
  arm-none-eabi-size -A "$1" | awk -v s="$2" '$1 == s { print $2; found = 1 } END { if (!found) print 0 }'
}

echo "-- size report (arm-none-eabi-size; flash = .vector_table + .text + .rodata + .data)"
echo "(size_probe: the whole pipeline, no printing; size_probe_measure: one measurement only,"
echo " auto-exposure + blank + sample: sequencer, photometry and simulator without calibration)"
printf '%-12s %-26s %8s %8s %8s %8s %8s\n' board binary .text .rodata .data .bss flash
for pair in mps2-an386:thumbv7em-none-eabihf microbit:thumbv6m-none-eabi; do
  board=${pair%%:*}
  target=${pair#*:}
  for bin in lumisorb-firmware size_probe size_probe_measure; do
    elf="$target_dir/$target/release/$bin"
    vt=$(section "$elf" .vector_table)
    text=$(section "$elf" .text)
    ro=$(section "$elf" .rodata)
    data=$(section "$elf" .data)
    bss=$(( $(section "$elf" .bss) + $(section "$elf" .uninit) ))
    flash=$((vt + text + ro + data))
    label=$bin
    [ "$bin" = size_probe ] && label="size_probe (pipeline)"
    [ "$bin" = size_probe_measure ] && label="size_probe_measure"
    printf '%-12s %-26s %8d %8d %8d %8d %8d\n' "$board" "$label" "$text" "$ro" "$data" "$bss" "$flash"
    if [ "$board" = mps2-an386 ]; then
      if [ "$bin" = size_probe ]; then probe_flash=$flash; fi
      if [ "$bin" = size_probe_measure ]; then measure_flash=$flash; fi
      if [ "$bin" = lumisorb-firmware ]; then firmware_flash=$flash; fi
      ram=$((data + bss))
      if [ "$ram" -gt "$STATIC_RAM_BUDGET" ]; then
        echo "FAIL: $bin static RAM $ram bytes > budget $STATIC_RAM_BUDGET"
        fail=1
      fi
    fi
  done
done
floats=$(arm-none-eabi-nm -C "$target_dir/thumbv7em-none-eabihf/release/lumisorb-firmware" |
  grep -c 'float_to_decimal\|float_to_exponential\|flt2dec' || true)
echo "float formatting symbols linked in the firmware: $floats (numbers are printed as scaled integers)"
for probe in size_probe size_probe_measure; do
  fmt_syms=$(arm-none-eabi-nm -C "$target_dir/thumbv7em-none-eabihf/release/$probe" | grep -c 'core::fmt' || true)
  echo "formatting symbols (core::fmt) linked in $probe: $fmt_syms"
  if [ "$fmt_syms" -ne 0 ]; then
    echo "FAIL: the pipeline without printing links formatting code"
    fail=1
  fi
done

echo "-- where the pipeline's flash goes (size_probe, mps2-an386: each instruction counted for the"
echo "   innermost source file of this repository in its inline chain, from objdump -l --inlines;"
echo "   code with none, by its function's name; read-only data and the vector table apart)"
probe_elf="$target_dir/thumbv7em-none-eabihf/release/size_probe"
{
  arm-none-eabi-objdump -d -l --inlines --no-show-raw-insn "$probe_elf"
  echo "@ro $(section "$probe_elf" .rodata)"
  echo "@vt $(section "$probe_elf" .vector_table)"
  echo "@text $(section "$probe_elf" .text)"
} | awk -v root="$root/" '
  function hex(s,   i, v) { v = 0; s = tolower(s); for (i = 1; i <= length(s); i++) v = v * 16 + index("0123456789abcdef", substr(s, i, 1)) - 1; return v }
  function layer(path) {
    if (index(path, root) != 1) return ""
    path = substr(path, length(root) + 1)
    if (path ~ /^src\/(calibration|quantification|limits)/) return "calibration and quantification (f64)"
    if (path ~ /^src\/(student_t|incomplete_beta)/) return "t and F distributions (f64 special functions)"
    if (path ~ /^src\/math/) return "math door (square root; libm code inlined through it)"
    if (path ~ /^src\/instrument/) return "sequencer (instrument)"
    if (path ~ /^src\/sim/) return "simulated photometer (sim)"
    if (path ~ /^src\//) return "core photometry (accumulator, robust, net_signal, photometry)"
    return "the demo application (pipeline.rs, probe main)"
  }
  function by_name(fn) {
    if (fn ~ /libm/) return "libm (not inlined)"
    if (fn ~ /compiler_builtins|^__|^mem/) return "compiler_builtins (soft-float f64, memcpy)"
    return "runtime and core (cortex-m-rt, not inlined core code)"
  }
  function flush(next_addr,   size, g, i) {
    if (!have) return
    size = next_addr - addr; if (size > 4 || size < 0) size = 2
    g = ""
    for (i = 1; i <= n && g == ""; i++) g = layer(chain[i])
    if (g == "") g = by_name(fn)
    sum[g] += size; have = 0
  }
  /^@ro / { sum["read-only data (.rodata)"] += $2; next }
  /^@vt / { sum["vector table"] += $2; next }
  /^@text / { text = $2; next }
  /^[0-9a-f]+ <.*>:$/ { flush(hex($1)); fn = substr($2, 2, length($2) - 3); n = 0; fresh = 1; next }
  /^(inlined by )?\/[^ ]*:[0-9]+/ {
    line = $0; inl = sub(/^inlined by /, "", line); sub(/:[0-9]+.*$/, "", line)
    if (fresh) { n = (inl && n > 0) ? 1 : 0; fresh = 0 }
    chain[++n] = line; next
  }
  /^ +[0-9a-f]+:\t/ { a = $1; sub(/:$/, "", a); flush(hex(a)); addr = hex(a); have = 1; fresh = 1; next }
  END {
    flush(addr + 2)
    for (g in sum) if (g !~ /^(read-only|vector)/) code += sum[g]
    sum["alignment padding between functions"] = text - code
    for (g in sum) { printf "%8d  %s\n", sum[g], g; total += sum[g] }
    printf "%8d  total (= flash)\n", total
  }' | sort -rn

defmt_flash=$(( $(section "$defmt_elf" .vector_table) + $(section "$defmt_elf" .text) + $(section "$defmt_elf" .rodata) + $(section "$defmt_elf" .data) ))
echo "firmware with defmt logging: $defmt_flash bytes flash (without: ${firmware_flash:-?})"
for pair in "size_probe:${probe_flash:-0}:whole pipeline" "size_probe_measure:${measure_flash:-0}:one measurement (sequencer, photometry, simulator)"; do
  name=${pair%%:*}; rest=${pair#*:}; bytes=${rest%%:*}; what=${rest#*:}
  if [ "$bytes" -gt "$FLASH_BUDGET" ]; then
    echo "FAIL: $what ($name) $bytes bytes flash > budget $FLASH_BUDGET on thumbv7em-none-eabihf (see the breakdown above)"
    fail=1
  else
    echo "within budget: $what ($name) $bytes bytes flash <= $FLASH_BUDGET on thumbv7em-none-eabihf"
  fi
done

echo "-- stack (painted high-water mark)"
for board in mps2-an386 microbit; do
  line=$(grep '^stack ' "$work/$board.txt" || true)
  echo "$board: ${line#stack }"
  one=$(echo "$line" | sed -n 's/.*one_measurement_bytes=\([0-9]*\).*/\1/p')
  if [ -z "$one" ] || [ "$one" -gt "$STACK_BUDGET" ]; then
    echo "FAIL: $board stack of one measurement ${one:-unknown} bytes > budget $STACK_BUDGET"
    fail=1
  fi
done

if [ "$fail" -ne 0 ]; then
  echo "firmware on emulated boards: FAILED"
  exit 1
fi
echo "firmware on emulated boards: passed"
