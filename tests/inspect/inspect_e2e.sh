#!/bin/sh
# End to end on the synthetic line: teach from good frames, inspect a mixed
# batch, and compare every verdict with the generator's ground truth, in
# both directions (good parts must pass, defective parts must not).
# usage: inspect_e2e.sh MODEBAND SCRATCH FAMILY LIGHTING [MAX_FALSE_REJECTS]
# MAX_FALSE_REJECTS (default 1) bounds the good parts rejected in the batch.
set -u
mb=$1
tmp=$2
fam=$3
light=$4
max_fr=${5:-1}
rm -rf "$tmp" && mkdir -p "$tmp"
. "$(dirname "$0")/../check.sh"

size=640x512
"$mb" synth --family "$fam" --count 30 --seed 21 --size $size --lighting "$light" \
    --out "$tmp/good" >/dev/null || bad "synth good"
"$mb" teach --images "$tmp/good" --out "$tmp/model.json" --mm-per-px 0.1 \
    >"$tmp/teach.txt" 2>&1 || { bad "teach"; cat "$tmp/teach.txt"; }
# defects the local and size checks must catch (all of 0.5 mm and more);
# tears (slits 0.2-0.5 mm wide) and contamination (blobs, fibres 0.15-0.3 mm
# wide) are narrower than the landmark spacing: the dense measurement
# between landmarks must see them
"$mb" synth --family "$fam" --count 40 --seed 22 --size $size --lighting "$light" \
    --defect-rate 0.5 --defects nick,flash,size,missing,empty,deform,tear,contamination \
    --out "$tmp/batch" >/dev/null || bad "synth batch"
"$mb" inspect --model "$tmp/model.json" --json "$tmp"/batch/*.pgm >"$tmp/out.jsonl"
[ $? -eq 0 ] && ok || bad "inspect exit status"

# the JSON contract: one object per image, in order, with every key
n_img=$(ls "$tmp"/batch/*.pgm | wc -l)
n_out=$(wc -l <"$tmp/out.jsonl")
[ "$n_img" -eq "$n_out" ] && ok || bad "$n_out lines for $n_img images"
for key in image verdict reasons pose modes t2 residual outlines gauges ms; do
    n=$(grep -c "\"$key\":" "$tmp/out.jsonl")
    [ "$n" -eq "$n_img" ] && ok || bad "key $key in $n of $n_img lines"
done
ls "$tmp"/batch/*.pgm >"$tmp/order.txt"
sed -n 's/^{"image":"\([^"]*\)".*/\1/p' "$tmp/out.jsonl" | diff -q - "$tmp/order.txt" >/dev/null &&
    ok || bad "results not in the order given"

# verdicts against the truth
sed -n 's/.*"defect":{"type":"\([^"]*\)".*/\1/p' "$tmp/batch/labels.jsonl" >"$tmp/truth.txt"
sed -n 's/.*"verdict":"\([^"]*\)".*/\1/p' "$tmp/out.jsonl" >"$tmp/verdict.txt"
paste -d' ' "$tmp/truth.txt" "$tmp/verdict.txt" >"$tmp/pairs.txt"
good=$(awk '$1 == "none"' "$tmp/pairs.txt" | wc -l)
good_pass=$(awk '$1 == "none" && $2 == "pass"' "$tmp/pairs.txt" | wc -l)
defect=$(awk '$1 != "none"' "$tmp/pairs.txt" | wc -l)
escaped=$(awk '$1 != "none" && $2 == "pass"' "$tmp/pairs.txt" | wc -l)
echo "$fam/$light: good parts $good_pass of $good passed; defective parts $escaped of $defect passed (escapes)"
awk '$1 != "none" && $2 == "pass" {print "  escape:", $0}' "$tmp/pairs.txt"
[ "$good" -ge 10 ] && [ "$defect" -ge 10 ] && ok || bad "batch too one-sided"
# both directions; loose enough for noise, tight enough to catch a break
[ "$good_pass" -ge $((good - max_fr)) ] && ok || bad "good parts rejected: $((good - good_pass)) of $good (at most $max_fr allowed)"
[ "$escaped" -le 1 ] && ok || bad "defective parts passed: $escaped of $defect"
# a pass never carries a reason, a reject or fault always does
awk '/"verdict":"pass"/ && !/"reasons":\[\]/ {exit 1} /"verdict":"(reject|fault)"/ && /"reasons":\[\]/ {exit 1}' \
    "$tmp/out.jsonl" && ok || bad "reasons do not match the verdicts"
# empty frames are rejected as no part
awk '$1 == "empty" && $2 != "reject" {exit 1}' "$tmp/pairs.txt" && ok || bad "empty frame not rejected"

# bad input: never a crash, never a pass
printf 'P5\n64 48\n255\n' >"$tmp/small.pgm"
head -c 3072 /dev/zero >>"$tmp/small.pgm"
printf 'P5\n640 512\n255\n' >"$tmp/grey.pgm"
head -c 327680 /dev/zero | tr '\0' '\200' >>"$tmp/grey.pgm"
printf 'not an image' >"$tmp/junk.pgm"
"$mb" inspect --model "$tmp/model.json" --json "$tmp/small.pgm" "$tmp/grey.pgm" \
    "$tmp/junk.pgm" >"$tmp/bad.jsonl"
[ $? -eq 0 ] && ok || bad "bad images: exit status"
[ "$(grep -c '"verdict":"pass"' "$tmp/bad.jsonl")" -eq 0 ] && ok || bad "a bad image passed"
grep -q '"image":"'"$tmp"'/small.pgm","verdict":"fault"' "$tmp/bad.jsonl" && ok || bad "wrong-size frame is not a fault"
grep -q '"image":"'"$tmp"'/grey.pgm","verdict":"reject".*"no-part"' "$tmp/bad.jsonl" && ok || bad "one-colour frame is not a no-part reject"
grep -q '"image":"'"$tmp"'/junk.pgm","verdict":"fault"' "$tmp/bad.jsonl" && ok || bad "unreadable image is not a fault"
head -c 1000 "$tmp/model.json" >"$tmp/broken.json"
"$mb" inspect --model "$tmp/broken.json" "$tmp/grey.pgm" >/dev/null 2>"$tmp/err.txt"
[ $? -eq 1 ] && ok || bad "corrupt model: exit status"
grep -q broken.json "$tmp/err.txt" && ok || bad "corrupt model: file not named"

echo "inspect e2e $fam/$light: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
