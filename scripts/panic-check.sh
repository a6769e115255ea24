#!/usr/bin/env bash
# Link-time proof that no public entry point of logtrim can reach a panic on a real target.
#
# Builds targets/panic-check (every public entry point called with opaque inputs; a panic handler that
# calls a function defined nowhere) for thumbv6m-none-eabi and thumbv7em-none-eabihf, at opt-level "s"
# (profile release) and 3 (profile release-o3). A panic path that survives optimisation fails the link
# with "undefined symbol: logtrim_panic_check_found_a_reachable_panic".
#
# First, a canary: the same build with one deliberate `i64::clamp` on opaque bounds must fail to link, so
# the check is known to be able to fail.
#
# On a failure the script links again with the `locate` feature (a real handler) and prints, for each call
# into the panic machinery, the chain of inlined frames down to the line of logtrim that can panic
# (arm-none-eabi-objdump and addr2line), or else the linker's reason why the machinery is live.
#
# Usage: scripts/panic-check.sh [--profile P]... [--bin B]... [TARGET...]
#   default profiles: release release-o3; release-checked adds overflow checks inside logtrim.
#   default binaries: all of them (`all` calls every entry point; the others are the size report's parts:
#   f32_path, fixed_load, fixed_path, baseline).
set -euo pipefail
cd "$(dirname "$0")/.."
# The crate is its own workspace and builds into its own target/ (the paths below rely on it).
unset CARGO_TARGET_DIR
manifest=targets/panic-check/Cargo.toml
targets=()
profiles=()
bins=()
while [ $# -gt 0 ]; do
    case "$1" in
        --profile) profiles+=("$2"); shift 2 ;;
        --bin) bins+=("$2"); shift 2 ;;
        *) targets+=("$1"); shift ;;
    esac
done
[ ${#targets[@]} -gt 0 ] || targets=(thumbv6m-none-eabi thumbv7em-none-eabihf)
[ ${#profiles[@]} -gt 0 ] || profiles=(release release-o3)
select=(--bins)
[ ${#bins[@]} -gt 0 ] && select=("${bins[@]/#/--bin=}")
[ ${#bins[@]} -gt 0 ] || bins=(all)
panic_symbols='core::panicking|begin_unwind|panic_fmt|panic_bounds_check|_index_fail|unwrap_failed'

locate() { # target profile
    local dir=targets/panic-check/target/locate
    echo "--- where the panic paths are ($1, profile $2):" >&2
    CARGO_TARGET_DIR=$dir RUSTFLAGS="-W linker-messages -C link-arg=--why-live=*panicking*" \
        cargo build --quiet --manifest-path "$manifest" --target "$1" --profile "$2" --features locate "${select[@]}" \
        >"$dir.log" 2>&1 || true
    local b bin
    for b in "${bins[@]}"; do
        bin=$dir/$1/$2/$b
        if command -v arm-none-eabi-objdump >/dev/null && [ -f "$bin" ]; then
            arm-none-eabi-objdump -d --no-show-raw-insn "$bin" | grep -E "bl.*<.*(panicking|begin_unwind)" \
                | awk -F: '{print $1}' | while read -r addr; do
                echo "call at 0x$addr ($b):" >&2
                addr2line -e "$bin" -i -f -C "$addr" | paste - - | { grep -v '^core::' || true; } | sed 's/^/    /' >&2
            done
        else
            grep -E 'live symbol|referenced by' "$dir.log" | sed -E 's#[^ ]*\.rcgu\.o:##; s#^warning: linker stdout: ##' >&2
        fi
    done
}

mkdir -p target
echo "canary: a deliberate panic path must fail the link"
if cargo build --quiet --manifest-path "$manifest" --target thumbv7em-none-eabihf --release --features canary \
    --bin all 2>target/panic-canary.log; then
    echo "the canary linked: the check cannot see panics" >&2
    exit 1
fi
grep -q logtrim_panic_check_found_a_reachable_panic target/panic-canary.log
echo "canary: the link failed as it should"

status=0
for t in "${targets[@]}"; do
    for p in "${profiles[@]}"; do
        if cargo build --quiet --manifest-path "$manifest" --target "$t" --profile "$p" "${select[@]}"; then
            for b in "${bins[@]}"; do
                bin=targets/panic-check/target/$t/$p/$b
                # Evidence beside the link: no symbol of the panic machinery in the linked binary.
                if nm -C "$bin" | grep -E "$panic_symbols" >&2; then
                    echo "panic symbols linked in $bin" >&2
                    status=1
                else
                    echo "panic-free: $t, profile $p, $b ($(nm "$bin" | wc -l) symbols, none of the panic machinery)"
                fi
            done
        else
            echo "PANIC PATH: $t, profile $p: the link failed (see above)" >&2
            locate "$t" "$p"
            status=1
        fi
    done
done
exit $status
