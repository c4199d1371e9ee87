#!/bin/sh
# The calibration wired into teach and inspect (--calib), and the
# repeatability study (modeband repeatability) on the synthetic line's
# re-imaging mode (modeband synth --reimage).
#
# The synthetic camera looks straight down at 0.1 mm/px with no lens
# distortion, so a calibration document written here by hand for that
# camera (a homography: 10 px/mm, turned by 30 degrees and shifted, which
# leaves every length unchanged) must give the same gauges as --mm-per-px
# 0.1, to rounding; one for 0.11 mm/px must give gauges 1.1 times larger
# (exactly: every point goes through the calibration, not a default
# scale); one for another frame size must be refused with the sentence.
# The table is checked against numpy/scipy (ref_repeatability.py: one-way
# ANOVA within-part mean square, scipy's chi-square quantile, F against
# scipy.stats.f_oneway) from the same readings.
# usage: repeatability_test.sh MODEBAND SCRATCH GAUGES_JSON PYTHON
set -u
mb=$1
tmp=$2
gauges=$3
py=$4
here=$(dirname "$0")
rm -rf "$tmp" && mkdir -p "$tmp"
. "$(dirname "$0")/../check.sh"
has() { if grep -q -- "$2" "$1"; then ok; else bad "$3: '$2' not in $1"; fi; }

# calib FILE WIDTH HEIGHT PX_PER_MM: a calibration document of a camera
# looking straight down, the plane turned by 30 degrees in the image.
calib() {
    awk -v w="$2" -v h="$3" -v s="$4" 'BEGIN {
        c = s * cos(atan2(1, 1) * 4 / 6); n = s * sin(atan2(1, 1) * 4 / 6);
        printf "{\"format\": \"modeband-calibration\", \"version\": 1,\n";
        printf " \"created\": \"2026-01-01T00:00:00Z\",\n";
        printf " \"frame\": {\"width\": %d, \"height\": %d},\n", w, h;
        printf " \"target\": {\"rows\": 7, \"cols\": 9, \"pitch_mm\": 10},\n";
        printf " \"model\": {\"plane_to_image\": [[%.17g, %.17g, 300], [%.17g, %.17g, 40], [0, 0, 1]],\n", c, -n, n, c;
        printf "   \"distortion\": {\"centre_px\": [%.1f, %.1f], \"radius_px\": %.17g,\n", (w - 1) / 2, (h - 1) / 2, sqrt(w * w + h * h) / 2;
        printf "     \"k1\": 0, \"k2\": 0, \"p1\": 0, \"p2\": 0}},\n";
        printf " \"residuals\": {\"frames\": 1, \"points_per_frame\": 63, \"rms_px\": 0.01,\n";
        printf "   \"worst_px\": 0.02, \"worst_frame\": 0, \"worst_point\": 0, \"coverage\": 0.5,\n";
        printf "   \"iterations\": 3, \"frame_rms_px\": [0.01]},\n";
        printf " \"poses\": [{\"angle_deg\": 0, \"shift_mm\": [0, 0]}]}\n" }' >"$1"
}

size=640x512
"$mb" synth --family ring --count 30 --seed 21 --size $size --out "$tmp/good" >/dev/null || bad "synth good"
"$mb" synth --family ring --count 4 --reimage 5 --seed 23 --size $size --out "$tmp/rep" \
    >"$tmp/synth.txt" || bad "synth --reimage"
has "$tmp/synth.txt" "wrote 20 ring frames" "reimage count"
[ -f "$tmp/rep/ring_0004_05.pgm" ] && ok || bad "reimage names"
n=$(grep -c '"shot":4' "$tmp/rep/labels.jsonl")
[ "$n" -eq 4 ] && ok || bad "labels: $n records of shot 4, wanted 4"
# a new pose every shot: the five shots of part 1 at five places
np=$(grep '"index":0,' "$tmp/rep/labels.jsonl" | sed -n 's/.*"pose":{\([^}]*\)}.*/\1/p' | sort -u | wc -l)
[ "$np" -eq 5 ] && ok || bad "part 1 at $np distinct poses, wanted 5"

"$mb" synth --family ring --count 2 --reimage 0 --out "$tmp/x" >/dev/null 2>&1
[ $? -eq 2 ] && ok || bad "synth --reimage 0 not a usage error"
"$mb" synth --target --family ring --pitch 4 --rows 8 --cols 11 --out "$tmp/x" >/dev/null 2>&1
[ $? -eq 2 ] && ok || bad "synth --target with --family not a usage error"

calib "$tmp/cal.json" 640 512 10
calib "$tmp/cal11.json" 640 512 9.0909090909090909
calib "$tmp/cal800.json" 800 512 10

# ---- teach with a scale and with the calibration: the same gauges
"$mb" teach --images "$tmp/good" --out "$tmp/model.json" --mm-per-px 0.1 \
    --gauges "$gauges" >"$tmp/teach.txt" 2>&1 || { bad "teach"; cat "$tmp/teach.txt"; }
"$mb" teach --images "$tmp/good" --out "$tmp/model_cal.json" --calib "$tmp/cal.json" \
    --gauges "$gauges" >"$tmp/teach_cal.txt" 2>&1 || { bad "teach --calib"; cat "$tmp/teach_cal.txt"; }
g1=$(grep "gauge OD" "$tmp/teach.txt")
g2=$(grep "gauge OD" "$tmp/teach_cal.txt")
[ -n "$g1" ] && [ "$g1" = "$g2" ] && ok || bad "taught OD differs: '$g1' vs '$g2'"
# the scale at the frame centre, kept as the model's mm per px
m=$(sed -n 's/.*"mm_per_px":[[:space:]]*\([0-9.e-]*\).*/\1/p' "$tmp/model_cal.json")
if awk "BEGIN { exit !($m > 0.0999999 && $m < 0.1000001) }"; then ok; else bad "model mm_per_px '$m', wanted 0.1"; fi
"$mb" teach --images "$tmp/good" --out "$tmp/x.json" --calib "$tmp/cal800.json" \
    --gauges "$gauges" >/dev/null 2>"$tmp/err"
[ $? -eq 1 ] && ok || bad "teach with an 800x512 calibration not refused"
has "$tmp/err" "made for 800x512 px frames" "teach frame-size sentence"
"$mb" teach --images "$tmp/good" --out "$tmp/x.json" --calib "$tmp/cal.json" --mm-per-px 0.1 \
    >/dev/null 2>&1
[ $? -eq 2 ] && ok || bad "teach --calib with --mm-per-px not a usage error"

# ---- inspect: through the calibration equals the scale; 0.11 gives x1.1
img="$tmp/rep/ring_0001_01.pgm"
od() { sed -n 's/.*"name":"OD","value_mm":\([-0-9.e]*\).*/\1/p' "$1"; }
"$mb" inspect --model "$tmp/model.json" --json "$img" >"$tmp/i_px.json" || bad "inspect"
"$mb" inspect --model "$tmp/model.json" --calib "$tmp/cal.json" --json "$img" \
    >"$tmp/i_cal.json" || bad "inspect --calib"
"$mb" inspect --model "$tmp/model.json" --calib "$tmp/cal11.json" --json "$img" \
    >"$tmp/i_cal11.json" || bad "inspect --calib 0.11"
a=$(od "$tmp/i_px.json")
b=$(od "$tmp/i_cal.json")
c=$(od "$tmp/i_cal11.json")
echo "OD of $img: $a mm at 0.1 mm/px, $b mm through the calibration, $c mm at 0.11"
if awk "BEGIN { exit !($a > 35 && $a < 45 && ($b - $a) < 1e-6 && ($a - $b) < 1e-6) }"; then ok; else bad "OD $b through the calibration vs $a"; fi
if awk "BEGIN { r = $c / ($a * 1.1) - 1; exit !(r < 1e-6 && r > -1e-6) }"; then ok; else bad "OD $c at 0.11 mm/px, wanted 1.1 x $a"; fi
s=$(sed -n 's/.*"size_mm":\([-0-9.e]*\).*/\1/p' "$tmp/i_cal11.json")
s0=$(sed -n 's/.*"size_mm":\([-0-9.e]*\).*/\1/p' "$tmp/i_px.json")
if awk "BEGIN { r = $s / ($s0 * 1.1) - 1; exit !(r < 1e-6 && r > -1e-6) }"; then ok; else bad "size $s mm at 0.11, wanted 1.1 x $s0"; fi
"$mb" inspect --model "$tmp/model.json" --calib "$tmp/cal800.json" "$img" >/dev/null 2>"$tmp/err"
[ $? -eq 1 ] && ok || bad "inspect with an 800x512 calibration not refused"
has "$tmp/err" "cal800.json: made for 800x512 px frames, but this frame is 640x512 px" "inspect frame-size sentence"
"$mb" inspect --model "$tmp/model.json" --calib "$tmp/none.json" "$img" >/dev/null 2>&1
[ $? -eq 1 ] && ok || bad "inspect with a missing calibration not refused"

# ---- a calibration the program makes itself: frames of the target on the
# synthetic line (synth --target), then modeband calibrate; the synthetic
# camera's true scale is 0.1 mm/px everywhere, no distortion
"$mb" synth --target --pitch 4 --rows 8 --cols 11 --count 4 --size $size \
    --out "$tmp/target" >/dev/null || bad "synth --target"
"$mb" synth --target --pitch 10 --rows 8 --cols 11 --size $size --out "$tmp/x" >/dev/null 2>"$tmp/err"
[ $? -eq 2 ] && ok || bad "a target larger than the frame not refused"
has "$tmp/err" "does not fit a 640x512 px frame" "target-too-large sentence"
"$mb" calibrate --pitch 4 --rows 8 --cols 11 --out "$tmp/made.json" "$tmp"/target/target_0*.pgm \
    >"$tmp/calibrate.txt" 2>&1 || { bad "calibrate the synthetic camera"; cat "$tmp/calibrate.txt"; }
grep -E "reprojection|centre|bottom right" "$tmp/calibrate.txt"
for where in centre "top left" "bottom right"; do
    sc=$(sed -n "s/^  $where .*: \([0-9.]*\) mm\/px.*/\1/p" "$tmp/calibrate.txt")
    # within 0.1 % of the truth (measured: 0.001 % at the centre, 0.05 % at
    # the corners, where the distortion is extrapolated)
    if awk "BEGIN { d = $sc / 0.1 - 1; exit !(d < 0.001 && d > -0.001) }"; then ok; else bad "$where scale $sc, truth 0.1"; fi
done
"$mb" inspect --model "$tmp/model.json" --calib "$tmp/made.json" --json "$img" \
    >"$tmp/i_made.json" || bad "inspect --calib (made)"
m=$(od "$tmp/i_made.json")
echo "OD through the calibration made from the target frames: $m mm"
if awk "BEGIN { exit !($m - $a < 0.01 && $a - $m < 0.01) }"; then ok; else bad "OD $m through the made calibration vs $a"; fi

# ---- the station: a slot's "calibration"; one for another frame size
# leaves the slot unusable (its parts faults), with the sentence
station() {
    cat >"$tmp/st.json" <<EOC
{"format": "modeband-station", "version": 1, "station": "t",
 "camera": {"source": "replay", "width": 640, "height": 512,
            "replay": {"folder": "$tmp/rep", "fps": 0, "loop": false}},
 "trigger": "every",
 "slots": [{"slot": 1, "model": "$tmp/model.json", "calibration": "$1"}], "active_slot": 1,
 "plc": {"mode": "server", "bind": "127.0.0.1", "port": 0, "max_connections": 4},
 "logs": {"folder": "$tmp/logs_$2", "flush_interval_s": 1, "retention_days": 30,
          "reject_images": {"folder": "$tmp/rejects", "cap_mb": 20}},
 "shifts": [{"name": "all", "start": "00:00"}],
 "timeouts": {"inspection_ms": 2000, "frame_ms": 2000}}
EOC
    "$mb" run --config "$tmp/st.json" --parts 3 >/dev/null 2>"$tmp/station_$2.txt"
}
station "$tmp/made.json" made || bad "station with a calibration"
has "$tmp/station_made.txt" "3 parts: 3 passed" "station through the calibration"
has "$tmp/logs_made/"*.jsonl '"name":"OD","value_mm":' "station logs gauges in mm"
station "$tmp/cal800.json" c800
has "$tmp/station_c800.txt" "cal800.json: made for 800x512 px frames" "station frame-size sentence"
has "$tmp/station_c800.txt" "3 parts: 0 passed, 0 rejected, 3 faults" "station slot unusable"

# ---- the repeatability study
"$mb" repeatability --help >"$tmp/out" && ok || bad "repeatability --help"
has "$tmp/out" "<part>_<shot>.pgm" "naming rule in help"
"$mb" repeatability --model "$tmp/model.json" >/dev/null 2>&1
[ $? -eq 2 ] && ok || bad "repeatability without DIR not a usage error"
"$mb" repeatability --model "$tmp/model.json" --calib "$tmp/cal800.json" "$tmp/rep" >/dev/null 2>&1
[ $? -eq 1 ] && ok || bad "repeatability with an 800x512 calibration not refused"
"$mb" repeatability --model "$tmp/model_cal.json" --calib "$tmp/made.json" --verbose \
    "$tmp/rep" >"$tmp/grr.txt" 2>"$tmp/grr_err.txt"
[ $? -eq 0 ] && ok || { bad "repeatability exit"; cat "$tmp/grr_err.txt"; }
grep -v "(part " "$tmp/grr.txt"
n=$(grep -c "(part ring_000[1-4]): OD = [0-9.]*; ID = [0-9.]*$" "$tmp/grr.txt")
[ "$n" -eq 20 ] && ok || bad "$n verbose reading lines, wanted 20"
"$py" "$here/ref_repeatability.py" "$tmp/grr.txt" OD=1.5,ID=1.8 && ok || bad "table against numpy/scipy"
has "$tmp/grr.txt" "20 images of 4 parts (0 left out), measured through the calibration" "study summary"
for g in OD ID; do
    line=$(grep "^$g " "$tmp/grr.txt")
    # gauge kind parts n mean sd sd95 tol %GRR band...
    if echo "$line" | awk '{ exit !($3 == 4 && $4 == 20 && $6 > 0 && $6 < 0.01 &&
                                     $7 >= $6 && $9 > 0 && $9 < 100 &&
                                     ($10 == "acceptable" || $10 == "conditionally" || $10 == "not")) }'; then
        ok
    else
        bad "gauge $g: '$line'"
    fi
    # %GRR is 600 sd / tolerance (the printed, rounded figures)
    if echo "$line" | awk '{ g = 600 * $6 / $8; exit !(g - $9 < 0.01 + 1e-3 * g && $9 - g < 0.01 + 1e-3 * g) }'; then
        ok
    else
        bad "gauge $g: %GRR not 600 sd / tolerance: '$line'"
    fi
done
# A study that sees parts with no repeat: every image its own part.
mkdir -p "$tmp/single"
i=0
for f in "$tmp"/rep/ring_000[12]_01.pgm; do
    i=$((i + 1))
    cp "$f" "$tmp/single/p${i}_1.pgm"
done
"$mb" repeatability --model "$tmp/model.json" "$tmp/single" >/dev/null 2>"$tmp/err"
[ $? -eq 1 ] && ok || bad "a study without repeats not refused"
has "$tmp/err" "no part was measured twice" "no-repeat sentence"

echo "repeatability: $pass checks passed, $fail failed"
[ "$fail" -eq 0 ]
