#!/usr/bin/env bash
# Run every fuzz target in fuzz/ for a bounded number of executions, one
# after the other, at the lowest CPU priority. See docs/fuzzing.md.
#
#   scripts/fuzz.sh [RUNS] [TARGET...]
#
# RUNS      executions per target (default 1000000)
# TARGET    run only these targets (default: all, in the order below)
#
# Environment:
#   FUZZ_SEED=N     libFuzzer's random seed (default 1, so runs repeat)
#   FUZZ_FRESH=1    start from the seeds only, discarding the working corpus
#                   that earlier runs grew in fuzz/corpus/
#   FUZZ_MAX_LEN=N  largest input libFuzzer makes, in bytes (default 16384)
#
# Needs cargo-fuzz (`cargo install cargo-fuzz`) and a C++ compiler. The
# machine has only the stable toolchain; cargo-fuzz needs nightly flags
# (-Zsanitizer=address, sanitizer coverage), which RUSTC_BOOTSTRAP=1 lets
# the stable compiler accept.
#
# Prints one line per target (executions, seconds, executions per second,
# coverage edges and corpus inputs at the end, result) and writes the
# same table to fuzz/last-run.txt. A crash leaves the input in
# fuzz/artifacts/<target>/ and makes the script exit non-zero after the
# remaining targets have run.
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
cd "$ROOT"

RUNS="${1:-1000000}"
shift || true
ALL_TARGETS=(csv_frames npy_frames manifest code_table word_list lexicon_file model_file sensor_file)
if [ "$#" -gt 0 ]; then
    TARGETS=("$@")
else
    TARGETS=("${ALL_TARGETS[@]}")
fi
SEED="${FUZZ_SEED:-1}"
MAX_LEN="${FUZZ_MAX_LEN:-16384}"

if ! [[ "$RUNS" =~ ^[0-9]+$ ]] || [ "$RUNS" -lt 1 ]; then
    echo "fuzz.sh: RUNS must be a positive whole number, got \`$RUNS\`" >&2
    exit 2
fi
if ! cargo fuzz --version >/dev/null 2>&1; then
    echo "fuzz.sh: cargo-fuzz is not installed: run \`cargo install cargo-fuzz\`" >&2
    exit 2
fi

export RUSTC_BOOTSTRAP=1

echo "building fuzz targets (release, debug assertions, AddressSanitizer)..." >&2
nice -n 19 cargo fuzz build >&2

# Seeds: committed ones in fuzz/seeds/<target>/, plus the project's own
# files of each kind, gathered afresh into a scratch folder every run.
SCRATCH="$(mktemp -d)"
trap 'rm -rf "$SCRATCH"' EXIT

gather() { # gather TARGET FILE... : copy files into the target's seed folder
    local target="$1"
    shift
    mkdir -p "$SCRATCH/$target"
    local f
    for f in "$@"; do
        [ -f "$f" ] || continue
        # Flatten the path into a unique name.
        cp "$f" "$SCRATCH/$target/$(echo "$f" | tr '/' '_')"
    done
}

shopt -s nullglob globstar
gather csv_frames tests/compat/**/*.csv
gather npy_frames tests/compat/**/*.npy demo-data/**/*.npy
gather manifest tests/compat/**/*.json demo-data/**/*.json
gather code_table lexicons/*/code.txt tests/compat/**/code*.txt
gather lexicon_file tests/compat/**/*.lex
gather model_file tests/compat/**/model*.json
gather sensor_file sensors/*.json
for f in demo-data/**/*.csv; do
    # The first rows of each demo recording (whole ones are 100-200 KiB).
    head -n 12 "$f" >"$SCRATCH/csv_frames/$(echo "$f" | tr '/' '_')"
done
mkdir -p "$SCRATCH/word_list"
for f in lexicons/*/words.txt; do
    # The head of each list: the whole lists (half a MiB each) are far
    # larger than the inputs libFuzzer makes.
    head -n 300 "$f" >"$SCRATCH/word_list/$(echo "$f" | tr '/' '_')"
done

mkdir -p fuzz/corpus
SUMMARY="$SCRATCH/summary.txt"
printf '%-14s %12s %9s %8s %9s %8s  %s\n' target executions seconds exec/s coverage corpus result >"$SUMMARY"
failed=0
for t in "${TARGETS[@]}"; do
    if [ "${FUZZ_FRESH:-0}" = 1 ]; then
        rm -rf "fuzz/corpus/$t"
    fi
    mkdir -p "fuzz/corpus/$t" "fuzz/artifacts/$t" "$SCRATCH/$t"
    dirs=("fuzz/corpus/$t" "$SCRATCH/$t")
    [ -d "fuzz/seeds/$t" ] && dirs+=("fuzz/seeds/$t")
    log="$SCRATCH/$t.log"
    echo "fuzzing $t for $RUNS executions..." >&2
    start=$(date +%s.%N)
    set +e
    nice -n 19 cargo fuzz run "$t" "${dirs[@]}" -- \
        -runs="$RUNS" -seed="$SEED" -max_len="$MAX_LEN" \
        -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 >"$log" 2>&1
    rc=$?
    set -e
    end=$(date +%s.%N)
    secs=$(awk -v a="$start" -v b="$end" 'BEGIN { printf "%.0f", b - a }')
    execs=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log" | tail -n 1)
    execs="${execs:-?}"
    # libFuzzer's last status line: "#N DONE cov: EDGES ft: F corp: INPUTS/SIZE ...".
    cov=$(sed -n 's/.*DONE *cov: \([0-9]*\).*/\1/p' "$log" | tail -n 1)
    corp=$(sed -n 's/.*DONE .* corp: \([0-9]*\)\/.*/\1/p' "$log" | tail -n 1)
    if [ "$rc" -eq 0 ]; then
        result="clean"
    else
        result="FAILED (exit $rc; see fuzz/artifacts/$t/ and fuzz/last-$t.log)"
        cp "$log" "fuzz/last-$t.log"
        failed=1
    fi
    rate="?"
    if [[ "$execs" =~ ^[0-9]+$ ]] && [ "$secs" -gt 0 ]; then
        rate=$((execs / secs))
    fi
    printf '%-14s %12s %9s %8s %9s %8s  %s\n' "$t" "$execs" "$secs" "$rate" "${cov:-?}" "${corp:-?}" "$result" >>"$SUMMARY"
    tail -n 1 "$SUMMARY"
done

{
    echo "# scripts/fuzz.sh $RUNS ${TARGETS[*]} (seed $SEED, max_len $MAX_LEN), $(date -u +%Y-%m-%dT%H:%MZ)"
    echo "# $(rustc --version), $(cargo fuzz --version)"
    cat "$SUMMARY"
} >fuzz/last-run.txt
echo >&2
cat fuzz/last-run.txt >&2
exit "$failed"
