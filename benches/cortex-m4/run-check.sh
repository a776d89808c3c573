#!/usr/bin/env bash
# Build the Cortex-M4 firmware, run it in QEMU (mps2-an386, -icount shift=0,
# semihosting) and check it:
#   - the firmware exits with success (a panic exits with failure);
#   - SysTick calibration is exactly 40 instructions a tick (1 ns an
#     instruction, 25 MHz SysTick), so the instruction counts mean what they say;
#   - its `checksum` lines equal the golden file checksums.txt, which the host
#     test tests/target_equivalence.rs also checks: host == golden == target;
#   - lists every call to a panic routine inside the hot functions
#     (Modulator::process and the timed loops), from the disassembly.
#
# Usage: run-check.sh [--bless] [--no-panics]
#   --bless      write the emulator's checksum lines to checksums.txt
#   --no-panics  fail if any panic call site is found in the hot functions
# Needs: qemu-system-arm, the thumbv7em-none-eabihf target; llvm-objdump and
# llvm-symbolizer (Debian package llvm) for the panic listing, skipped without.
set -euo pipefail
cd "$(dirname "$0")"

bless=0
strict=0
for arg in "$@"; do
    case "$arg" in
        --bless) bless=1 ;;
        --no-panics) strict=1 ;;
        *) echo "unknown argument: $arg" >&2; exit 2 ;;
    esac
done

out=$(mktemp)
trap 'rm -f "$out"' EXIT

# The runner (qemu-system-arm ... -kernel) is set in .cargo/config.toml.
# Its exit status is the firmware's semihosting exit status.
if ! timeout 1200 cargo run --release --quiet >"$out"; then
    cat "$out"
    echo "FAIL: the firmware did not exit with success in the emulator" >&2
    exit 1
fi
cat "$out"

cal=$(awk '$1 == "calibration" { print $3 }' "$out")
if [ "$cal" != "40.000" ]; then
    echo "FAIL: SysTick calibration is '$cal' instructions a tick, expected 40.000" >&2
    echo "      (is QEMU run with -icount shift=0?)" >&2
    exit 1
fi

target_sums=$(grep '^checksum ' "$out" | sort)
if [ "$bless" = 1 ]; then
    printf '%s\n' "$target_sums" >checksums.txt
    echo "blessed: checksums.txt rewritten from the emulator"
fi
golden_sums=$(grep '^checksum ' checksums.txt | sort)
n=$(printf '%s\n' "$golden_sums" | grep -c '^checksum ' || true)
if [ "$n" -lt 3 ]; then
    echo "FAIL: checksums.txt holds $n configurations, at least 3 are checked" >&2
    exit 1
fi
if [ "$target_sums" != "$golden_sums" ]; then
    echo "FAIL: target checksums differ from checksums.txt:" >&2
    diff <(printf '%s\n' "$golden_sums") <(printf '%s\n' "$target_sums") >&2 || true
    exit 1
fi
echo "ok: $n target checksums equal checksums.txt (the host test checks the same file)"

elf="${CARGO_TARGET_DIR:-target}/thumbv7em-none-eabihf/release/ticktone-cortex-m4"
if command -v llvm-objdump >/dev/null && command -v llvm-symbolizer >/dev/null; then
    # Hot functions: the modulator's block call, the stage functions it
    # calls that the optimiser keeps out of line, and the timed loops.
    syms=$(llvm-objdump -t "$elf" | awk '$NF ~ /Modulator.*7process|Oversampler4push|Requantiser7process|EdgeSolver9crossings|EdgeSolver14crossings_pair|LegPair5split|^tt_loop_|^tt_block_|^tt_chain_blocks/ { print $NF }' | sort -u)
    sites=0
    root=$(cd ../.. && pwd)
    for s in $syms; do
        while read -r addr; do
            [ -n "$addr" ] || continue
            sites=$((sites + 1))
            # The innermost frame outside the standard library: the line of
            # our code that can panic.
            where=$(llvm-symbolizer --obj="$elf" "0x$addr" | grep -v '^/rustc/' | grep ':[0-9]' | head -n 1)
            name=$(llvm-cxxfilt "$s" | sed 's/\$LT\$/</g; s/\$GT\$/>/g; s/::h[0-9a-f]*$//')
            where=${where#"$root/"}
            echo "panic call site: $name at 0x$addr (${where:-unknown})"
        done < <(llvm-objdump -d --no-show-raw-insn --disassemble-symbols="$s" "$elf" |
            awk '/\tbl\t/ && /panic|index_fail|unwrap_failed|expect_failed|assert_failed|len_mismatch/ { sub(":", "", $1); print $1 }')
    done
    echo "panic call sites in the hot functions: $sites"
    if [ "$strict" = 1 ] && [ "$sites" -gt 0 ]; then
        echo "FAIL: --no-panics and $sites panic call sites" >&2
        exit 1
    fi
else
    echo "note: llvm-objdump/llvm-symbolizer not found, panic listing skipped"
fi
