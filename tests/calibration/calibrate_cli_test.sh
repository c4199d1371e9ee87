#!/bin/sh
# End-to-end checks of `modeband target` and `modeband calibrate`: exit
# codes 0/1/2 with one sentence on stderr for a failure, the SVG sheet, the
# calibration document, the figures printed, the refusals (wrong pitch,
# wrong grid, target too small, frames of two sizes) and the loud warning
# for a poor fit. Frames come from calib_ref_driver (rendered with a known
# camera). usage: calibrate_cli_test.sh MODEBAND DRIVER SCRATCH
set -u
mb=$1
driver=$2
tmp=$3
rm -rf "$tmp" && mkdir -p "$tmp"
. "$(dirname "$0")/../check.sh"

# expect CODE DESCRIPTION -- command...
expect() {
    want=$1; what=$2; shift 3
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -eq "$want" ]; then ok; else bad "$what: exit $got, wanted $want"; cat "$tmp/out" "$tmp/err"; fi
    if [ "$want" -ne 0 ]; then
        n=$(wc -l <"$tmp/err")
        if [ "$n" -eq 1 ]; then ok; else bad "$what: $n lines on stderr, wanted 1"; cat "$tmp/err"; fi
    fi
}
has() { if grep -q -- "$2" "$1"; then ok; else bad "$3: '$2' not in $1"; fi; }
hasnt() { if grep -q -- "$2" "$1"; then bad "$3: '$2' in $1"; else ok; fi; }

# ---- modeband target
expect 0 "target help" -- "$mb" target --help
has "$tmp/out" "usage: modeband target" "target help text"
expect 2 "target without --out" -- "$mb" target --pitch 10 --rows 7 --cols 9
expect 2 "target pitch not in tenths" -- "$mb" target --pitch 10.05 --rows 7 --cols 9 --out "$tmp/t.svg"
has "$tmp/err" "multiple of 0.1" "pitch sentence"
expect 2 "target too few rows" -- "$mb" target --pitch 10 --rows 4 --cols 9 --out "$tmp/t.svg"
expect 2 "target bad number" -- "$mb" target --pitch ten --rows 7 --cols 9 --out "$tmp/t.svg"
expect 1 "target unwritable" -- "$mb" target --pitch 10 --rows 7 --cols 9 --out "$tmp/no/such/t.svg"
expect 0 "target" -- "$mb" target --pitch 10 --rows 7 --cols 9 --out "$tmp/t.svg"
has "$tmp/out" "7 x 9 dots, pitch 10.0 mm" "target summary"
has "$tmp/t.svg" '<svg xmlns="http://www.w3.org/2000/svg" width="110.000mm"' "true scale"
has "$tmp/t.svg" "pitch 10.0 mm, dot diameter 5.00 mm" "parameters printed"
n=$(grep -c "<circle" "$tmp/t.svg")
# 63 dots + 3 corner marks + the code of 10.0 mm (v = 100 = 0b1100100,
# 3 bits, check 100 mod 3 = 1: 1 bit) = 70.
if [ "$n" -eq 70 ]; then ok; else bad "target: $n circles, wanted 70"; fi

# ---- modeband calibrate
if "$driver" frames "$tmp" >"$tmp/drv" 2>&1; then ok; else bad "driver"; cat "$tmp/drv"; fi
F="$tmp/clean_1.pgm $tmp/clean_2.pgm $tmp/clean_3.pgm $tmp/clean_4.pgm"
expect 0 "calibrate help" -- "$mb" calibrate --help
has "$tmp/out" "usage: modeband calibrate" "calibrate help text"
expect 2 "calibrate without frames" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --out "$tmp/c.json"
expect 2 "calibrate without --pitch" -- "$mb" calibrate --rows 7 --cols 9 --out "$tmp/c.json" $F
expect 2 "calibrate bad --radial" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --radial 3 --out "$tmp/c.json" $F
expect 1 "calibrate missing frame" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --out "$tmp/c.json" "$tmp/none.pgm"
# shellcheck disable=SC2086
expect 0 "calibrate" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --out "$tmp/cal.json" $F
has "$tmp/out" "reprojection RMS" "RMS printed"
has "$tmp/out" "worst dot row" "worst point printed"
has "$tmp/out" "bottom right" "corner scale printed"
has "$tmp/out" "wrote $tmp/cal.json" "file written"
hasnt "$tmp/err" "WARNING" "no warning for a good fit"
has "$tmp/cal.json" '"modeband-calibration"' "document format"
has "$tmp/cal.json" '"plane_to_image"' "document model"
rms=$(sed -n 's/^reprojection RMS \([0-9.]*\) px.*/\1/p' "$tmp/out")
if awk "BEGIN { exit !($rms < 0.05) }"; then ok; else bad "RMS $rms px not under 0.05"; fi
# The scale at the centre, against the renderer's truth (0.25170 mm/px).
sc=$(sed -n 's/^  centre .*: \([0-9.]*\) mm\/px.*/\1/p' "$tmp/out")
truth=$(cat "$tmp/centre_scale.txt")
if awk "BEGIN { d = $sc / $truth - 1; exit !(d < 0.0005 && d > -0.0005) }"; then ok; else bad "centre scale $sc vs truth $truth"; fi

# refusals, each naming the frame
expect 1 "wrong pitch" -- "$mb" calibrate --pitch 8 --rows 7 --cols 9 --out "$tmp/x.json" $F
has "$tmp/err" "clean_1.pgm: the target in view was printed with a 10.0 mm pitch" "pitch refusal"
expect 1 "wrong grid" -- "$mb" calibrate --pitch 10 --rows 6 --cols 9 --out "$tmp/x.json" $F
has "$tmp/err" "has 7 x 9 dots" "grid refusal"
expect 1 "too small" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --out "$tmp/x.json" "$tmp/far_1.pgm"
has "$tmp/err" "far_1.pgm: the calibration target is too small" "small refusal"
expect 1 "two sizes" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --out "$tmp/x.json" "$tmp/clean_1.pgm" "$tmp/small_1.pgm"
has "$tmp/err" "same camera setting" "size refusal"
if [ -e "$tmp/x.json" ]; then bad "a refused calibration wrote a file"; else ok; fi
# a measured pitch within 5 % of the printed one is accepted
expect 0 "measured pitch" -- "$mb" calibrate --pitch 9.8 --rows 7 --cols 9 --out "$tmp/m.json" $F

# a poor fit is saved, with a warning the user must see
expect 0 "poor fit" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --radial 0 --no-tangential --out "$tmp/poor.json" $F
has "$tmp/err" "WARNING: the reprojection RMS" "poor fit warning"
if [ -s "$tmp/poor.json" ]; then ok; else bad "poor fit not saved"; fi
expect 0 "strict limit" -- "$mb" calibrate --pitch 10 --rows 7 --cols 9 --max-rms 0.001 --out "$tmp/s.json" $F
has "$tmp/err" "WARNING" "limit warning"

echo "calibrate_cli: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
