#!/bin/sh
# Teaching benchmark (issue 3): 100 frames of 1280 x 1024 per family, the
# total seconds and the split per stage as `modeband teach` prints it, plus
# the leave-one-out false-reject estimate. Prints figures; not a pass/fail
# test. Skips (77) unless MB_BENCH=1.
# usage: bench_teach.sh MODEBAND SCRATCH [COUNT]
set -u
[ "${MB_BENCH:-0}" = 1 ] || { echo "bench_teach: set MB_BENCH=1 to run"; exit 77; }
mb=$1
tmp=$2
count=${3:-100}
rm -rf "$tmp" && mkdir -p "$tmp"
echo "teaching from $count frames of 1280x1024 per family (OPENBLAS_NUM_THREADS=1)"
for fam in ring flange hose lipseal; do
    "$mb" synth --family "$fam" --count "$count" --seed 5 --out "$tmp/$fam" >/dev/null || exit 1
    sync
    start=$(date +%s.%N)
    OPENBLAS_NUM_THREADS=1 "$mb" teach --images "$tmp/$fam" --out "$tmp/$fam.json" \
        --mm-per-px 0.1 >"$tmp/$fam.txt" 2>&1 || { cat "$tmp/$fam.txt"; exit 1; }
    end=$(date +%s.%N)
    wall=$(echo "$end - $start" | awk '{print $1 - $3}')
    printf '%-8s wall %.2f s | %s | %s\n' "$fam" "$wall" \
        "$(grep '^time:' "$tmp/$fam.txt" | sed 's/^time: //')" \
        "$(grep '^estimated false-reject' "$tmp/$fam.txt" | sed 's/estimated false-reject rate (leave-one-out): //')"
    rm -rf "$tmp/$fam"
done
