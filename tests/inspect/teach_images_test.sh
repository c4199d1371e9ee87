#!/bin/sh
# Teaching from images with bad input among the good: each unusable image is
# skipped with its reason in the summary; too few usable images are refused
# with a sentence. usage: teach_images_test.sh MODEBAND SCRATCH
set -u
mb=$1
tmp=$2
rm -rf "$tmp" && mkdir -p "$tmp"
. "$(dirname "$0")/../check.sh"
has() { if grep -q -- "$2" "$1"; then ok; else bad "$3: '$2' not found"; cat "$1"; fi; }

d="$tmp/set"
"$mb" synth --family flange --count 14 --seed 31 --size 640x512 --out "$d" >/dev/null || bad synth
"$mb" synth --family flange --count 1 --seed 32 --size 640x512 --defect-rate 1 \
    --defects empty --out "$tmp/e" >/dev/null && cp "$tmp/e/flange_0001.pgm" "$d/x_empty.pgm"
"$mb" synth --family flange --count 1 --seed 33 --size 640x512 --defect-rate 1 \
    --defects cut --out "$tmp/c" >/dev/null && cp "$tmp/c/flange_0001.pgm" "$d/x_cut.pgm"
"$mb" synth --family flange --count 1 --seed 34 --size 800x600 --out "$tmp/s" >/dev/null &&
    cp "$tmp/s/flange_0001.pgm" "$d/x_size.pgm"
printf 'P5\n640 512\n255\n' >"$d/x_truncated.pgm"
printf 'garbage' >"$d/x_garbage.png"

"$mb" teach --images "$d" --out "$tmp/m.json" --mm-per-px 0.1 >"$tmp/out.txt" 2>"$tmp/err.txt"
[ $? -eq 0 ] && ok || { bad "teach with bad images among 14 good"; cat "$tmp/err.txt"; }
has "$tmp/out.txt" "images: 19 found, 14 used, 5 skipped" "summary counts"
has "$tmp/out.txt" "x_empty.pgm: " "empty frame listed"
has "$tmp/out.txt" "x_cut.pgm: " "cut part listed"
has "$tmp/out.txt" "x_size.pgm: the image is 800x600 px" "other size listed"
has "$tmp/out.txt" "x_truncated.pgm: " "truncated file listed"
has "$tmp/out.txt" "x_garbage.png: " "garbage file listed"
has "$tmp/out.txt" "warning: only 14 good parts" "small-set warning"
grep -q "x_empty.pgm: .*part" "$tmp/out.txt" && ok || bad "empty frame reason does not mention the part"
grep -q "x_cut.pgm: .*edge" "$tmp/out.txt" && ok || bad "cut part reason does not mention the edge"
"$mb" model-info "$tmp/m.json" >"$tmp/info.txt" 2>&1 && ok || bad "model-info on the taught model"
has "$tmp/info.txt" "limits:     learned from 14 good parts" "model keeps the limits"

# too few usable images: refused with a sentence, exit 1
mkdir -p "$tmp/few"
cp "$d"/flange_000[1-8].pgm "$d"/x_*.p* "$tmp/few/"
"$mb" teach --images "$tmp/few" --out "$tmp/f.json" >"$tmp/fout.txt" 2>"$tmp/ferr.txt"
[ $? -eq 1 ] && ok || bad "too few usable images not refused"
has "$tmp/ferr.txt" "only 8 of 13 images show a usable part" "refusal sentence"
[ "$(wc -l <"$tmp/ferr.txt")" -eq 1 ] && ok || bad "refusal is not one sentence"
[ ! -e "$tmp/f.json" ] && ok || bad "a model was written despite the refusal"

echo "teach images: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
