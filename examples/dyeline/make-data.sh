#!/usr/bin/env bash
# Remakes this scenario's committed data: the chamber run of unit QM-DL2-0117 and its validation run
# (simulated, seeded: the same seed and plan give the same files, bit for bit), the unit's calibration
# file and its EEPROM image.
#
#   examples/dyeline/make-data.sh
#
# The calibration file and the image carry the time they were made, so a remake differs from the
# committed ones in `created_unix_s`, the image's calibration time and its CRC, and in nothing else.
# Rebuild the crate afterwards (cargo does, because build.rs watches calibration/COEFFS.json).
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
root="$(cd "$here/../.." && pwd)"
serial="QM-DL2-0117"

cargo build -q --manifest-path "$root/Cargo.toml" -p logtrim-cli --bin logtrim
logtrim="${CARGO_TARGET_DIR:-$root/target}/debug/logtrim"

cd "$here"
# 1. The chamber run: 5 set-points from 5 to 55 °C × 21 ratios from 1e-3 to 2 × 3 repeats = 315 rows,
#    and 400 validation readings at random (ratio, temperature), with their truth kept apart.
"$logtrim" simulate --frontend frontend.json --seed 117 --setpoints 5 --ratios 21 --repeats 3 \
    --validation 400 --serial "$serial" --out-dir data
# 2. The fit. The chamber file's unit column carries the unit's serial, which the fit records.
mkdir -p calibration
"$logtrim" fit data/cal.csv --extrapolate 5 -o calibration/COEFFS.json
# 3. The unit's EEPROM image, and a check of it.
"$logtrim" image calibration/COEFFS.json -o "calibration/$serial.bin"
"$logtrim" inspect "calibration/$serial.bin"
