#!/usr/bin/env bash
# The C library and a unit's C data compiled for Cortex-M0 (soft float) and Cortex-M4F (hard float) with
# arm-none-eabi-gcc under -std=c99 -Wall -Wextra -Werror -pedantic, at -O2 and -Os (compile only), with
# the code size of each object printed. The unit is the worked example's (examples/dyeline).
#
# Usage: scripts/c-targets.sh        (needs arm-none-eabi-gcc and newlib: Debian's gcc-arm-none-eabi and
#                                      libnewlib-arm-none-eabi)
set -euo pipefail
cd "$(dirname "$0")/.."
export CARGO_TERM_COLOR=never
out=$(mktemp -d)
trap 'rm -rf "$out"' EXIT

cargo build -q --release -p logtrim-cli --bin logtrim
./target/release/logtrim c-library -o "$out"
./target/release/logtrim emit examples/dyeline/calibration/COEFFS.json --format c --c-name dyeline_unit \
  -o "$out/unit.c"

declare -A CPU=(
  [cortex-m0]="-mcpu=cortex-m0 -mthumb -mfloat-abi=soft"
  [cortex-m4f]="-mcpu=cortex-m4 -mthumb -mfloat-abi=hard -mfpu=fpv4-sp-d16"
)
echo "$(arm-none-eabi-gcc --version | head -1)"
for core in cortex-m0 cortex-m4f; do
  for opt in O2 Os; do
    for src in ltrm unit; do
      # shellcheck disable=SC2086
      arm-none-eabi-gcc ${CPU[$core]} -"$opt" -std=c99 -Wall -Wextra -Werror -pedantic -ffunction-sections \
        -fdata-sections -I "$out" -c "$out/$src.c" -o "$out/$src.$core.$opt.o"
    done
    text=$(arm-none-eabi-size "$out/ltrm.$core.$opt.o" | awk 'NR == 2 { print $1 }')
    unit=$(arm-none-eabi-size "$out/unit.$core.$opt.o" | awk 'NR == 2 { print $1 }')
    echo "  $core -$opt: ltrm.c $text bytes of code and constants (every entry point), unit data $unit bytes"
  done
done
echo "C library compiled for both cores"
