#!/usr/bin/env bash
# Figures of the fixed-point path on the cores that need it, printed (no pass/fail): the C library with the
# unit's C data (separate translation units, as a firmware builds them) and the Rust fixed path, built for
# Cortex-M0 (thumbv6m, soft float) and Cortex-M4F (thumbv7em, hard float) at -O2 and -Os, run one sample
# at a time in the unicorn CPU emulator on realistic streams of two units, next to a naive float correction
# on the same inputs. Sources in bench/arm/ (C driver, Rust driver crate, emulator runner, report).
#
# Paths: the direct correction, the stage cache, the code table (x over the log code for the temperature's
# window), a block at one temperature through a stage and through the code table, and the naive float.
# Prints instructions per sample (and, for the stage cache and the code table, the hits apart from the
# samples that built them, and those builds), an M0 cycle estimate, library-helper calls per sample, the
# helpers each build links, flash, per-sample code (all of it, and a hit's and the build's apart), the code
# table's fallbacks to the stage cache, static RAM, the stage cache's and the code table's
# sizes, the stack high-water mark, and whether every ARM result matches the host library bit for bit
# (exit 1 if not).
#
# Usage: scripts/bench-arm.sh [SAMPLES]      (default 256 samples per stream)
#
# The units: one raw-NTC unit (preset photometer-ntc, its temperature read as a 12-bit NTC channel code)
# and one digital-sensor unit (preset gas-uncompensated, its temperature in m°C), simulated and fitted
# with the seeds below. It installs what it needs when missing: the cross compiler and newlib (Debian
# packages), unicorn (Python registry) and the Rust targets.
set -euo pipefail
cd "$(dirname "$0")/.."
ROOT=$PWD
N=${1:-256}
OUT="$ROOT/target/bench-arm"
export CARGO_TERM_COLOR=never
export SOURCE_DATE_EPOCH=1700000000

echo "=== tools ==="
apt_pkgs=()
command -v arm-none-eabi-gcc >/dev/null || apt_pkgs+=(gcc-arm-none-eabi binutils-arm-none-eabi)
[ -e /usr/lib/arm-none-eabi/newlib/thumb/v6-m/nofp/libm.a ] || apt_pkgs+=(libnewlib-arm-none-eabi)
if [ ${#apt_pkgs[@]} -gt 0 ]; then
  echo "installing ${apt_pkgs[*]}"
  apt-get update -qq && apt-get install -y -qq --no-install-recommends "${apt_pkgs[@]}" >/dev/null
fi
python3 -c 'import unicorn' 2>/dev/null || pip install -q unicorn
for t in thumbv6m-none-eabi thumbv7em-none-eabihf; do
  rustup target list --installed | grep -qx "$t" || rustup target add "$t"
done
echo "  $(arm-none-eabi-gcc --version | head -1); unicorn $(python3 -c 'import unicorn; print(unicorn.__version__)'); $(rustc --version)"

echo "=== units (simulate, fit) and their tables, streams and host results ==="
cargo build -q --release -p logtrim-cli --bin logtrim
cargo build -q --release -p logtrim-host --example arm_bench
LOGTRIM="$ROOT/target/release/logtrim"
rm -rf "$OUT/units" "$OUT/data" "$OUT/results" "$OUT/elf"
mkdir -p "$OUT/units" "$OUT/data" "$OUT/results" "$OUT/elf"
(
  cd "$OUT/units"
  "$LOGTRIM" simulate --preset photometer-ntc --seed 11 --validation 200 --out-dir ntc >/dev/null
  "$LOGTRIM" sensor settings --beta 3900 --r0 10k --t0 25 --series 10k --placement low --bits 12 \
    --open-margin 8 --short-margin 8 --min -40 --max 125 -o ntc/sensor.json >/dev/null
  "$LOGTRIM" fit ntc/cal.csv --sensor ntc/sensor.json -o ntc/coeffs.json >/dev/null
  "$LOGTRIM" simulate --preset gas-uncompensated --seed 11 --validation 200 --out-dir digital >/dev/null
  "$LOGTRIM" fit digital/cal.csv -o digital/coeffs.json >/dev/null
)
declare -A DESC=([ntc]="photometer-ntc preset, raw 12-bit NTC channel" [digital]="gas-uncompensated preset, temperature in m°C")
for unit in ntc digital; do
  "$ROOT/target/release/examples/arm_bench" "$OUT/units/$unit/coeffs.json" "$OUT/data/$unit" "$N"
  python3 - "$OUT/data/$unit" "${DESC[$unit]}" <<'EOF'
import json, sys
d, desc = sys.argv[1], sys.argv[2]
b = json.load(open(d + "/bench.json"))
fallbacks = {s["name"]: [s["table_fallbacks"], s["table_valid_codes"]] for s in b["streams"]}
json.dump({"desc": desc, "table_bytes": b["table_bytes"], "universal_bytes": b["universal_bytes"],
           "table_fallbacks": fallbacks}, open(d + "/meta.json", "w"))
EOF
  echo "  $unit: ${DESC[$unit]}"
done

declare -A CPU=(
  [m0]="-mcpu=cortex-m0 -mthumb -mfloat-abi=soft"
  [m4]="-mcpu=cortex-m4 -mthumb -mfloat-abi=hard -mfpu=fpv4-sp-d16"
)
declare -A TRIPLE=([m0]=thumbv6m-none-eabi [m4]=thumbv7em-none-eabihf)
ENTRY=(-Wl,-u,bench_reset -Wl,-u,bench_empty -Wl,-u,bench_direct -Wl,-u,bench_cached -Wl,-u,bench_stage_at -Wl,-u,bench_block
  -Wl,-u,bench_table -Wl,-u,bench_table_prime -Wl,-u,bench_tblock -Wl,-u,bench_naive)
LINK=(-nostartfiles -T "$ROOT/bench/arm/link.ld" -Wl,--gc-sections --specs=nosys.specs)

echo "=== builds (gcc $(arm-none-eabi-gcc -dumpversion), rustc) and emulation, $N samples per stream ==="
for unit in ntc digital; do
  data="$OUT/data/$unit"
  for core in m0 m4; do
    for opt in O2 Os; do
      # shellcheck disable=SC2086
      celf="$OUT/elf/$unit.c.$core.$opt.elf"
      nelf="$OUT/elf/$unit.naive.$core.$opt.elf"
      for naive in 0 1; do
        arm-none-eabi-gcc ${CPU[$core]} -"$opt" -std=c99 -Wall -Wextra -Werror -ffunction-sections -fdata-sections \
          -DBENCH_NAIVE=$naive -I "$data" "$ROOT/bench/arm/c/driver.c" "$data/ltrm.c" "$data/unit.c" \
          "${LINK[@]}" "${ENTRY[@]}" -lm \
          -o "$([ $naive = 1 ] && echo "$nelf" || echo "$celf")"
      done
      rlevel=${opt#O}
      [ "$rlevel" = "2" ] || rlevel=s
      LOGTRIM_BENCH_UNIT_RS="$data/unit.rs" CARGO_PROFILE_RELEASE_OPT_LEVEL="$rlevel" \
        cargo build -q --release --manifest-path "$ROOT/bench/arm/rust/Cargo.toml" \
        --target "${TRIPLE[$core]}" --target-dir "$OUT/rust-$opt"
      relf="$OUT/elf/$unit.rust.$core.$opt.elf"
      # shellcheck disable=SC2086
      arm-none-eabi-gcc ${CPU[$core]} "${LINK[@]}" "${ENTRY[@]}" \
        "$OUT/rust-$opt/${TRIPLE[$core]}/release/liblogtrim_arm_bench.a" -o "$relf"
      python3 "$ROOT/bench/arm/runner.py" "$celf" "$data/bench.json" --core "$core" --label "C $core -$opt" \
        --paths direct,cached,table,block,tblock --json "$OUT/results/$unit.c.$core.$opt.json" >/dev/null
      # The same with the library and the unit's data in the driver's translation unit (a build per serial).
      oelf="$OUT/elf/$unit.c1.$core.$opt.elf"
      # shellcheck disable=SC2086
      arm-none-eabi-gcc ${CPU[$core]} -"$opt" -std=c99 -Wall -Wextra -Werror -ffunction-sections -fdata-sections \
        -DBENCH_NAIVE=0 -I "$data" -I "$ROOT/bench/arm/c" "$ROOT/bench/arm/c/one_unit.c" \
        "${LINK[@]}" "${ENTRY[@]}" -lm -o "$oelf"
      python3 "$ROOT/bench/arm/runner.py" "$oelf" "$data/bench.json" --core "$core" --label "C one TU $core -$opt" \
        --paths direct,cached,table,block,tblock --json "$OUT/results/$unit.c1.$core.$opt.json" >/dev/null
      python3 "$ROOT/bench/arm/runner.py" "$nelf" "$data/bench.json" --core "$core" --label "naive $core -$opt" \
        --paths naive --json "$OUT/results/$unit.naive.$core.$opt.json" >/dev/null
      python3 "$ROOT/bench/arm/runner.py" "$relf" "$data/bench.json" --core "$core" --label "Rust $core -$opt" \
        --paths direct,cached,table,block,tblock --json "$OUT/results/$unit.rust.$core.$opt.json" >/dev/null
      echo "  $unit $core -$opt: C and Rust measured"
    done
  done
done

python3 "$ROOT/bench/arm/report.py" "$OUT/results"
