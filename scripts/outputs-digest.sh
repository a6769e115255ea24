#!/usr/bin/env bash
# Prints a SHA-256 digest of every artefact the tool writes for the built-in presets: chamber runs,
# calibration files, images (binary and Intel HEX), emitted Rust/C/JSON tables, and corrected readings on
# the f32 and fixed paths. Two trees that print the same digests write the same bytes.
#
#   scripts/outputs-digest.sh [DIR]     # DIR defaults to a fresh temporary folder
#
# SOURCE_DATE_EPOCH fixes every time stamp; runs are seeded, so the digests are reproducible.
set -euo pipefail
cd "$(dirname "$0")/.."
export SOURCE_DATE_EPOCH=1700000000
cargo build -q --release -p logtrim-cli --bin logtrim
bin="$PWD/target/release/logtrim"
out="${1:-$(mktemp -d)}"
mkdir -p "$out"
cd "$out"
for p in gas-uncompensated photometer-compensated photometer-ntc; do
  "$bin" simulate --preset "$p" --seed 11 --validation 2000 --out-dir "$p" >/dev/null
  sensor=()
  if [ "$p" = photometer-ntc ]; then
    "$bin" sensor settings --beta 3900 --r0 10k --t0 25 --series 10k --placement low --bits 12 \
      --open-margin 8 --short-margin 8 --min -40 --max 125 -o "$p/sensor.json" >/dev/null
    sensor=(--sensor "$p/sensor.json")
  fi
  "$bin" fit "$p/cal.csv" "${sensor[@]}" -o "$p/coeffs.json" >/dev/null
  "$bin" image "$p/coeffs.json" -o "$p/unit.bin" --serial "D-${p:0:12}" >/dev/null
  "$bin" image "$p/coeffs.json" -o "$p/unit.hex" --format hex --base-address 0x08040000 --serial "D-${p:0:12}" >/dev/null
  for f in rust c json; do "$bin" emit "$p/coeffs.json" --format "$f" -o "$p/tables.$f" >/dev/null 2>&1; done
  for path in f32 fixed; do "$bin" apply "$p/coeffs.json" "$p/readings.csv" --path "$path" -o "$p/out-$path.csv" >/dev/null; done
done
# Relative paths only, so the digests do not depend on the folder.
find . -type f | LC_ALL=C sort | xargs sha256sum
