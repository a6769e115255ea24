#!/usr/bin/env bash
# logtrim's core arithmetic on emulated Cortex-M cores, compared bit for bit with the host's.
#
# 1. The host writes the vector file: two units' images (with fixed tables; one with an NTC sensor table)
#    and ~2600 records of seeded inputs with the host's outcomes (logtrim-vectors, make-vectors).
# 2. targets/qemu includes the file and is built as a release binary for each target, then run under
#    qemu-system-arm with semihosting:
#      thumbv6m-none-eabi      on lm3s6965evb (a Cortex-M3 machine; ARMv6-M code, soft float)
#      thumbv7em-none-eabihf   on mps2-an386  (a Cortex-M4 machine with its FPU)
#    Each prints every mismatch and "N passed, N failed", and exits 0 only if all records agree.
#
# Needs qemu-system-arm (Debian: qemu-system-arm) and the two rustup targets.
# Usage: scripts/qemu-tests.sh [SEED]
set -euo pipefail
cd "$(dirname "$0")/.."
seed=${1:-17}
vectors=$PWD/target/qemu-vectors.bin

# Built with the workspace's features (what `cargo test --workspace --all-features` already compiled), so
# that CI does not compile the host library a second time with another feature set.
cargo build --quiet --workspace --all-features --bin make-vectors
"${CARGO_TARGET_DIR:-target}/debug/make-vectors" "$vectors" examples/dyeline/calibration/COEFFS.json "$seed"

status=0
for pair in thumbv6m-none-eabi:lm3s6965evb thumbv7em-none-eabihf:mps2-an386; do
    target=${pair%%:*}
    machine=${pair##*:}
    LOGTRIM_VECTORS=$vectors env -u CARGO_TARGET_DIR cargo build --quiet --manifest-path targets/qemu/Cargo.toml --release --target "$target"
    elf=targets/qemu/target/$target/release/logtrim-qemu
    echo "--- $target on qemu $machine ($(size "$elf" | awk 'NR == 2 { print $1 }') bytes of flash)"
    if ! timeout 600 qemu-system-arm -M "$machine" -nographic -monitor none -serial none \
        -semihosting-config enable=on,target=native -kernel "$elf" </dev/null; then
        echo "FAILED: $target on $machine" >&2
        status=1
    fi
done
exit $status
