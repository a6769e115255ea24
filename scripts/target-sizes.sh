#!/usr/bin/env bash
# Code size of logtrim's f32 and fixed paths per target: flash bytes (text + read-only data) of small
# binaries from targets/panic-check, linked with the profile a firmware ships (opt-level "s", fat LTO,
# panic = abort), each minus the binary it builds on:
#
#   f32 path     f32_path   − baseline     Calibration::correct + one unit (libm's logf/expf included; on
#                                          cores without an FPU, the soft-float routines it calls too)
#   fixed path   fixed_path − fixed_load   FixedCalibration::correct + one unit, on tables already loaded
#   image load   fixed_load − baseline     Image::parse + fixed_into: checking an image and copying its
#                                          fixed tables to RAM (a firmware with `const` tables has none)
#   everything   all        − baseline     every public entry point (the panic check's binary)
#
# The figures are measured, not judged: nothing fails on a size. `--symbols` adds each path's largest
# functions.
#
# Usage: scripts/target-sizes.sh [--symbols]
set -euo pipefail
cd "$(dirname "$0")/.."
# The crate is its own workspace and builds into its own target/ (the paths below rely on it).
unset CARGO_TARGET_DIR
manifest=targets/panic-check/Cargo.toml
symbols=false
[ "${1:-}" = "--symbols" ] && symbols=true

flash() { # ELF → text + rodata bytes (GNU size, Berkeley format: "text" counts every read-only section)
    size "$1" | awk 'NR == 2 { print $1 }'
}

printf '%-28s %10s %10s %10s %12s\n' target "f32 path" "fixed path" "image load" "everything"
for t in thumbv6m-none-eabi thumbv7em-none-eabihf riscv32imc-unknown-none-elf; do
    cargo build --quiet --manifest-path "$manifest" --target "$t" --release --bins
    d=targets/panic-check/target/$t/release
    base=$(flash "$d/baseline")
    f32=$(( $(flash "$d/f32_path") - base ))
    load=$(( $(flash "$d/fixed_load") - base ))
    fixed=$(( $(flash "$d/fixed_path") - $(flash "$d/fixed_load") ))
    all=$(( $(flash "$d/all") - base ))
    printf '%-28s %10s %10s %10s %12s\n' "$t" "$f32 B" "$fixed B" "$load B" "$all B"
    if $symbols; then
        for bin in f32_path fixed_path; do
            echo "  largest functions in $bin:"
            nm -C --size-sort -S "$d/$bin" | grep -iE '^[0-9a-f]+ [0-9a-f]+ [tT] ' | tail -n 8 \
                | while read -r _ sz _ name; do printf '    %6d  %s\n' "$((16#$sz))" "$name"; done
        done
    fi
done
