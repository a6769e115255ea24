#!/usr/bin/env bash
# Fuzz every target under fuzz/ for SECONDS each (default 30), then print each target's executions and
# executions per second. Inputs up to 65 535 bytes (the largest image); an input that runs longer than 10 s
# is a finding (a hang), as is one that needs more than 2 GB.
#
#   scripts/fuzz.sh            # 30 s per target: CI's smoke run
#   scripts/fuzz.sh 3600       # an hour per target
#
# Uses the nightly toolchain (AddressSanitizer); without nightly it falls back to stable without a sanitizer
# (-s none). Installs cargo-fuzz if it is missing. Findings are saved under fuzz/artifacts/TARGET/; the corpus
# grows in fuzz/corpus/TARGET/ (seeded from fuzz/seeds/TARGET/) and is reused by the next run. See
# fuzz/README.md for long runs, reproducing and minimising a finding.
set -euo pipefail

secs="${1:-30}"
if ! [[ "$secs" =~ ^[0-9]+$ ]] || [ "$secs" -eq 0 ]; then
  echo "usage: scripts/fuzz.sh [SECONDS]   (a whole number of seconds per target, default 30)" >&2
  exit 2
fi
cd "$(dirname "$0")/.."

if ! cargo fuzz --version >/dev/null 2>&1; then
  echo "installing cargo-fuzz" >&2
  cargo install cargo-fuzz --locked
fi

if rustup run nightly rustc --version >/dev/null 2>&1; then
  toolchain=(+nightly)
  sanitizer=()
else
  echo "note: no nightly toolchain; fuzzing on stable without a sanitizer (-s none)" >&2
  toolchain=()
  sanitizer=(-s none)
fi

targets=$(cargo "${toolchain[@]}" fuzz list --fuzz-dir fuzz)
summary=()
for t in $targets; do
  corpus="fuzz/corpus/$t"
  mkdir -p "$corpus"
  seeds=()
  [ -d "fuzz/seeds/$t" ] && seeds=("fuzz/seeds/$t")
  log="fuzz/target/fuzz-$t.log"
  mkdir -p fuzz/target
  echo "=== $t: ${secs} s ===" >&2
  # libFuzzer writes its statistics to stderr; keep them for the summary and show the tail.
  if ! cargo "${toolchain[@]}" fuzz run --fuzz-dir fuzz "${sanitizer[@]}" "$t" "$corpus" "${seeds[@]}" -- \
      -max_total_time="$secs" -max_len=65535 -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 >"$log" 2>&1; then
    tail -40 "$log" >&2
    echo "FAILED: $t (full log: $log; the input is under fuzz/artifacts/$t/)" >&2
    exit 1
  fi
  runs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -1)
  rate=$(sed -n 's/^stat::average_exec_per_sec: *//p' "$log" | tail -1)
  cov=$(grep -o 'cov: [0-9]*' "$log" | tail -1 | sed 's/cov: //')
  summary+=("$(printf '%-24s %12s runs %9s exec/s  coverage %s' "$t" "${runs:-?}" "${rate:-?}" "${cov:-?}")")
done

echo
echo "fuzzing finished, ${secs} s per target:"
printf '  %s\n' "${summary[@]}"
