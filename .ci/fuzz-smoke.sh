#!/usr/bin/env bash
# Fuzz smoke run: builds every target under fuzz/ and fuzzes each for SECONDS
# (default 60) from a copy of the committed corpus, so the repository is not
# modified. Fails on any crash, timeout (10 s per input) or memory use above
# 2 GB. See docs/fuzzing.md.
#
# cargo-fuzz needs a nightly compiler for its instrumentation flags. With a
# nightly toolchain installed, it is used; otherwise the stable one is told to
# accept them with RUSTC_BOOTSTRAP=1.
set -euo pipefail
cd "$(dirname "$0")/.."
seconds="${1:-60}"
targets=(spectrum_reader transient_reader invert_spectrum)

if rustup toolchain list 2>/dev/null | grep -q '^nightly'; then
    fuzz=(cargo +nightly fuzz)
else
    echo "fuzz-smoke: no nightly toolchain, using stable with RUSTC_BOOTSTRAP=1"
    export RUSTC_BOOTSTRAP=1
    fuzz=(cargo fuzz)
fi
# No address sanitizer: the crate has no unsafe code (docs/fuzzing.md), and
# ASan would about double build and run time. Debug assertions and overflow
# checks stay on (cargo-fuzz's default without -O). cargo-fuzz's single
# codegen unit is kept: 16 units build faster but made the inversion about
# five times slower.
build_flags=(--sanitizer none)

"${fuzz[@]}" build "${build_flags[@]}"

work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
# The targets run side by side (the machine has 2 cores; each target is
# single-threaded), so the step takes the build plus SECONDS.
pids=()
for t in "${targets[@]}"; do
    mkdir -p "$work/corpus/$t" "$work/artifacts/$t"
    cp -R "fuzz/corpus/$t/." "$work/corpus/$t/"
    echo "fuzz-smoke: $t for ${seconds}s"
    "${fuzz[@]}" run "${build_flags[@]}" "$t" "$work/corpus/$t" -- \
        -max_total_time="$seconds" -rss_limit_mb=2048 -timeout=10 \
        -artifact_prefix="$work/artifacts/$t/" -print_final_stats=1 \
        >"$work/$t.log" 2>&1 &
    pids+=("$!")
done

failed=0
for i in "${!targets[@]}"; do
    t="${targets[$i]}"
    if wait "${pids[$i]}"; then
        grep -E 'stat::number_of_executed_units|stat::average_exec_per_sec|stat::peak_rss_mb' \
            "$work/$t.log" | sed "s/^/fuzz-smoke: $t /"
    else
        failed=1
        tail -n 60 "$work/$t.log"
        for a in "$work/artifacts/$t"/*; do
            [ -e "$a" ] || continue
            echo "fuzz-smoke: $t failed on $(basename "$a"); the input in base64" \
                "(reproduce: decode it to a file, then cargo fuzz run $t FILE):"
            base64 "$a"
        done
    fi
done
if [ "$failed" -ne 0 ]; then
    echo "fuzz-smoke: FAILED"
    exit 1
fi
echo "fuzz-smoke: ${#targets[@]} targets, no crash"
