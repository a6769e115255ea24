#!/usr/bin/env bash
# Regenerates docs/error-vs-x.svg, the README's chart: a simulated unit of a built-in front end, fitted, and
# its error in x against x before and after correction, drawn by `logtrim plot`. Seeded: the same preset
# and seed give the same data.
#
#   scripts/make-readme-chart.sh [PRESET] [SEED]     (default: gas-uncompensated 7)
set -euo pipefail
cd "$(dirname "$0")/.."
preset="${1:-gas-uncompensated}"
seed="${2:-7}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

cargo build -q --release -p logtrim-cli --bin logtrim
bin="${CARGO_TARGET_DIR:-target}/release/logtrim"
"$bin" simulate --preset "$preset" --seed "$seed" --out-dir "$work" >/dev/null
"$bin" fit "$work/cal.csv" -o "$work/COEFFS.json" -q >/dev/null
"$bin" plot "$work/COEFFS.json" "$work/cal.csv" --serial U0001 -o "$work/charts" >/dev/null
mkdir -p docs
cp "$work/charts/U0001-error-vs-x.svg" docs/error-vs-x.svg
echo "wrote docs/error-vs-x.svg ($preset, seed $seed)"
