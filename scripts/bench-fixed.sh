#!/usr/bin/env bash
# Figures of the fixed-point path, printed (no pass/fail): instructions per corrected sample counted by
# valgrind's callgrind over 10^6 samples (fixed path against a naive f32 correction with libm logf/expf),
# ns per sample (divan), and the time of the exhaustive `logtrim verify` on the hand-made units.
#
# Usage: scripts/bench-fixed.sh [--quick]   (--quick: 10^5 samples, verify with --path fixed only)
set -euo pipefail
cd "$(dirname "$0")/.."
export CARGO_TERM_COLOR=never
N=1000000
VERIFY_PATHS=(both fixed)
if [ "${1:-}" = "--quick" ]; then N=100000; VERIFY_PATHS=(fixed); fi
OUT="$(mktemp -d)"
trap 'rm -rf "$OUT"' EXIT

echo "=== building (bench profile: no overflow checks, as a firmware release build) ==="
cargo build -q --profile bench -p logtrim-host --example fixed_loop --example fixed_coeffs
cargo build -q --release -p logtrim-cli --bin logtrim
LOOP=target/release/examples/fixed_loop

echo
echo "=== instructions per sample (callgrind, $N samples, only inside the sample loop) ==="
if command -v valgrind >/dev/null; then
  declare -A IR
  for p in fixed-raw fixed-mc fixed-staged fixed-block fixed-cached fixed-cached-miss naive-raw naive-mc naive-raw-held; do
    valgrind --tool=callgrind --callgrind-out-file="$OUT/cg.$p" --toggle-collect='*run_*' \
      "$LOOP" "$p" "$N" >/dev/null 2>"$OUT/vg.$p"
    total=$(grep -E '^summary:' "$OUT/cg.$p" | awk '{print $2}')
    IR[$p]=$(awk -v t="$total" -v n="$N" 'BEGIN { printf "%.1f", t / n }')
    printf '  %-13s %8s instructions per sample\n' "$p" "${IR[$p]}"
  done
  awk -v a="${IR[naive-raw]}" -v b="${IR[fixed-raw]}" 'BEGIN { printf "  naive-raw / fixed-raw = %.2fx\n", a / b }'
  awk -v a="${IR[naive-mc]}" -v b="${IR[fixed-mc]}" 'BEGIN { printf "  naive-mc / fixed-mc  = %.2fx\n", a / b }'
  awk -v a="${IR[naive-mc]}" -v b="${IR[fixed-staged]}" 'BEGIN { printf "  naive-mc / fixed-staged = %.2fx\n", a / b }'
  awk -v a="${IR[naive-mc]}" -v b="${IR[fixed-block]}" 'BEGIN { printf "  naive-mc / fixed-block = %.2fx\n", a / b }'
  awk -v a="${IR[naive-raw-held]}" -v b="${IR[fixed-cached]}" \
    'BEGIN { printf "  naive-raw-held / fixed-cached = %.2fx   (same stream: a new temperature code every 64 samples)\n", a / b }'
  echo "  (fixed-cached-miss: a new temperature code at every sample, what one stage rebuild costs)"
  echo "  (goal: under 150 per sample and at least 3x fewer than naive)"
else
  echo "  valgrind not found: skipped"
fi

echo
echo "=== ns per sample (divan) ==="
cargo bench -q -p logtrim-host --bench fixed 2>/dev/null | sed 's/^/  /'

echo
echo "=== exhaustive verify (every code x 0.05 K grid), release, $(nproc) cores ==="
"target/release/examples/fixed_coeffs" "$OUT/coeffs" >/dev/null
for unit in ideal hard_uncompensated hard_compensated mild_compensated; do
  for path in "${VERIFY_PATHS[@]}"; do
    start=$(date +%s.%N)
    status=0
    target/release/logtrim verify "$OUT/coeffs/$unit.json" --path "$path" >"$OUT/verify.txt" || status=$?
    end=$(date +%s.%N)
    secs=$(awk -v a="$start" -v b="$end" 'BEGIN { printf "%.2f", b - a }')
    points=$(grep -E '^swept' "$OUT/verify.txt" | sed 's/^swept //; s/;.*//')
    n=$(echo "$points" | sed 's/.*= //; s/ points//')
    scaled=$(awk -v s="$secs" -v n="$n" 'BEGIN { printf "%.2f", s * 65536 * 1401 / n }')
    printf '  %-19s --path %-5s exit %d  %6s s  (%s; %s s scaled to 65,536 x 1,401)\n' \
      "$unit" "$path" "$status" "$secs" "$points" "$scaled"
    grep -E 'error  max' "$OUT/verify.txt" | sed 's/^ */      /'
  done
done
echo "  (goal: 65,536 codes x 1,401 temperatures in under 10 s on 2 cores)"
echo "  load average now: $(cut -d' ' -f1-3 /proc/loadavg)"
