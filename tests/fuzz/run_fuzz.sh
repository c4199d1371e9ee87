#!/bin/sh
# tests/fuzz/run_fuzz.sh FUZZER SEEDS SCRATCH SECONDS
# Run one libFuzzer target for a bounded time on a fresh copy of its seed
# corpus (so the source tree is never written). Exit status: the fuzzer's,
# 0 when the time ran out without a crash, leak, timeout or sanitizer report;
# a crashing input is left in SCRATCH/artifacts/.
set -eu
fuzzer=$1 seeds=$2 scratch=$3 secs=$4
if [ ! -x "$fuzzer" ]; then
    echo "run_fuzz: $fuzzer is missing; build the fuzz targets first (make fuzz)" >&2
    exit 1
fi
rm -rf "$scratch"
mkdir -p "$scratch/corpus" "$scratch/artifacts"
cp "$seeds"/* "$scratch/corpus/"
rc=0
"$fuzzer" -max_total_time="$secs" -timeout=10 -rss_limit_mb=1024 \
    -print_final_stats=1 -artifact_prefix="$scratch/artifacts/" \
    "$scratch/corpus" >"$scratch/log" 2>&1 || rc=$?
cat "$scratch/log"
if [ "$rc" -ne 0 ]; then
    # the log's middle is often cut in CI output: repeat why at the end
    echo "run_fuzz: $(basename "$fuzzer") failed (exit $rc); the cause:" >&2
    grep -a -E "internal error|ERROR|SUMMARY|^[a-z_]+: |artifact_prefix" \
        "$scratch/log" | grep -a -v -E "^#|^INFO" | head -20 >&2
fi
exit "$rc"
