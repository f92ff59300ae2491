#!/usr/bin/env bash
# Instructions per accumulated raw read, measured with callgrind (counts instructions, not time,
# so the figure is repeatable on a busy machine). Needs valgrind.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build -q --release --example accumulate_bench
bin="${CARGO_TARGET_DIR:-target}/release/examples/accumulate_bench"
count() {
  valgrind --tool=callgrind --callgrind-out-file=/dev/null "$bin" "$@" 2>&1 \
    | sed -n 's/.*Collected : *\([0-9]*\).*/\1/p'
}
small=$(count 1000)
large=$(count 61000)
base_small=$(count 1000 baseline)
base_large=$(count 61000 baseline)
loop=$(( (base_large - base_small) / 60000 ))
total=$(( (large - small) / 60000 ))
echo "callgrind: $small instructions for 1000 reads, $large for 61000 reads"
echo "per read: $total instructions in the loop, of which $loop make the read (baseline)"
echo "instructions per accumulated read: $(( total - loop ))"
