#!/bin/sh
# make demo: the whole path that exists so far, on built-in synthetic data
# (invented parts). 1) a model from the bundled landmark point sets; 2) a
# flange gasket taught from 30 synthetic good frames, nobody clicking
# landmarks; 3) a mixed batch of good and defective frames inspected, with
# the ground truth beside each verdict.
set -eu
build=${1:-build}
bin="$build/inspect/modeband"
out="$build/demo"
rm -rf "$out"
mkdir -p "$out"

echo "== 1. shape model from 30 example point sets (FG-3140, invented) =="
"$bin" teach --points tests/data/points --out "$out/fg3140.model.json" \
    --source "FG-3140 example point sets (invented demo part)" | sed -n '1,4p'
echo

family=${MB_DEMO_FAMILY:-flange}
echo "== 2. teach the $family gasket from 30 synthetic good frames =="
"$bin" synth --family "$family" --count 30 --seed 11 --out "$out/good" >/dev/null
gauges=""
[ -f "tests/data/gauges/$family.json" ] && gauges="--gauges tests/data/gauges/$family.json"
"$bin" teach --images "$out/good" --out "$out/$family.model.json" \
    --mm-per-px 0.1 --name "$family gasket (synthetic demo part)" $gauges \
    --report "$out/teach-report.html"
echo

echo "== 3. inspect a mixed batch: 24 frames, about 40 % defective =="
"$bin" synth --family "$family" --count 24 --seed 12 --defect-rate 0.4 \
    --out "$out/batch" >/dev/null
"$bin" inspect --model "$out/$family.model.json" --json \
    --overlay "$out/overlays" "$out"/batch/*.pgm >"$out/batch.jsonl"
printf '%-16s %-14s %-8s %s\n' image truth verdict "primary reason"
# join the verdicts with the generator's labels, line by line (same order)
sed -n 's/.*"image":"\([^"]*\)".*"defect":{"type":"\([^"]*\)".*/\1 \2/p' \
    "$out/batch/labels.jsonl" >"$out/truth.txt"
sed -n 's/.*"verdict":"\([^"]*\)","reasons":\[\(.*\)/\1 \2/p' "$out/batch.jsonl" |
    sed 's/^\([a-z]*\) {"code":[0-9]*,"name":"\([^"]*\)","text":"\([^"]*\)".*/\1 \2: \3/; s/^\([a-z]*\) \].*/\1 -/' \
    >"$out/verdicts.txt"
paste -d' ' "$out/truth.txt" "$out/verdicts.txt" |
    awk '{img=$1; truth=$2; verdict=$3; $1=$2=$3=""; sub(/^ +/, ""); printf "%-16s %-14s %-8s %s\n", img, truth, verdict, $0}'
awk '{t=$2; v=$3} END{}' /dev/null
paste -d' ' "$out/truth.txt" "$out/verdicts.txt" | awk '
    { good = ($2 == "none"); pass = ($3 == "pass");
      if (good && pass) gp++; else if (good) gr++; else if (pass) dp++; else dr++ }
    END { printf "\ngood parts: %d passed, %d rejected; defective parts: %d rejected, %d passed (escapes)\n", gp, gr, dr, dp }'
echo
echo "model:        $out/$family.model.json"
echo "teach report: $out/teach-report.html"
echo "overlays:     $out/overlays/"
echo "JSON results: $out/batch.jsonl"
