#!/bin/sh
# make demo: the whole job on built-in synthetic data (invented parts).
#  1. a shape model from the bundled landmark point sets;
#  2. the line's camera calibrated from frames of our calibration target
#     lying on the conveyor, so every gauge below is in mm on the plane;
#  3. a flange gasket taught from 30 synthetic good frames (nobody clicks
#     landmarks), with its drawing gauges;
#  4. a mixed batch inspected, each verdict beside the generator's truth;
#  5. a repeatability study of the gauges: 5 parts imaged 5 times each;
#  6. the station on the synthetic line for a few hundred parts: a PLC
#     simulator triggers over Modbus TCP, the line drifts slowly, parts are
#     logged per shift, reject images saved;
#  7. the shift report (terminal and HTML).
set -eu
build=${1:-build}
bin="$build/inspect/modeband"
out="$(pwd)/$build/demo"
rm -rf "$out"
mkdir -p "$out"
size=640x512
family=flange
parts=${MB_DEMO_PARTS:-300}

echo "== 1. shape model from 30 example point sets (FG-3140, invented) =="
"$bin" teach --points tests/data/points --out "$out/fg3140.model.json" \
    --source "FG-3140 example point sets (invented demo part)" | sed -n '1,4p'
echo

echo "== 2. calibrate the camera: 4 frames of the 8 x 11 dot target, pitch 4 mm =="
"$bin" target --pitch 4 --rows 8 --cols 11 --out "$out/target.svg" >/dev/null
"$bin" synth --target --pitch 4 --rows 8 --cols 11 --count 4 --size $size \
    --out "$out/target" >/dev/null
"$bin" calibrate --pitch 4 --rows 8 --cols 11 --out "$out/calibration.json" \
    "$out"/target/target_0*.pgm | grep -E "^reprojection|^  centre|^  bottom right|^wrote"
echo

echo "== 3. teach the $family gasket from 30 synthetic good frames =="
"$bin" synth --family "$family" --count 30 --seed 11 --size $size --out "$out/good" >/dev/null
"$bin" teach --images "$out/good" --out "$out/$family.model.json" \
    --calib "$out/calibration.json" --name "FG-3426 flange gasket (synthetic demo part)" \
    --gauges "tests/data/gauges/$family.json" --report "$out/teach-report.html"
echo

echo "== 4. inspect a mixed batch: 24 frames, about 40 % defective =="
"$bin" synth --family "$family" --count 24 --seed 12 --size $size --defect-rate 0.4 \
    --out "$out/batch" >/dev/null
"$bin" inspect --model "$out/$family.model.json" --calib "$out/calibration.json" --json \
    --overlay "$out/overlays" "$out"/batch/*.pgm >"$out/batch.jsonl"
printf '%-16s %-14s %-8s %s\n' image truth verdict "primary reason"
sed -n 's/.*"image":"\([^"]*\)".*"defect":{"type":"\([^"]*\)".*/\1 \2/p' \
    "$out/batch/labels.jsonl" >"$out/truth.txt"
sed -n 's/.*"verdict":"\([^"]*\)","reasons":\[\(.*\)/\1 \2/p' "$out/batch.jsonl" |
    sed 's/^\([a-z]*\) {"code":[0-9]*,"name":"\([^"]*\)","text":"\([^"]*\)".*/\1 \2: \3/; s/^\([a-z]*\) \].*/\1 -/' \
    >"$out/verdicts.txt"
paste -d' ' "$out/truth.txt" "$out/verdicts.txt" |
    awk '{img=$1; truth=$2; verdict=$3; $1=$2=$3=""; sub(/^ +/, ""); printf "%-16s %-14s %-8s %s\n", img, truth, verdict, $0}'
paste -d' ' "$out/truth.txt" "$out/verdicts.txt" | awk '
    { good = ($2 == "none"); pass = ($3 == "pass");
      if (good && pass) gp++; else if (good) gr++; else if (pass) dp++; else dr++ }
    END { printf "\ngood parts: %d passed, %d rejected; defective parts: %d rejected, %d passed (escapes)\n", gp+0, gr+0, dr+0, dp+0 }'
echo

echo "== 5. repeatability of the gauges: 5 parts, each re-placed and imaged 5 times =="
"$bin" synth --family "$family" --count 5 --reimage 5 --seed 14 --size $size \
    --out "$out/repeat" >/dev/null
"$bin" repeatability --model "$out/$family.model.json" --calib "$out/calibration.json" \
    "$out/repeat"
echo

echo "== 6. the station: $parts parts on the synthetic line, PLC simulator over Modbus TCP =="
# the line: 3 % defects and a slow drift (every part 0.004 % larger than the last)
"$bin" synth --family "$family" --count "$parts" --seed 13 --size $size \
    --defect-rate 0.03 --drift 0.00004 --out "$out/line" >/dev/null
cat >"$out/station.json" <<EOC
{"format": "modeband-station", "version": 1, "station": "demo-line-1",
 "camera": {"source": "replay", "width": 640, "height": 512,
            "replay": {"folder": "$out/line", "fps": 0, "loop": false}},
 "trigger": "plc",
 "slots": [{"slot": 1, "model": "$out/$family.model.json",
            "calibration": "$out/calibration.json"}], "active_slot": 1,
 "plc": {"mode": "server", "bind": "127.0.0.1", "port": 0, "max_connections": 4},
 "logs": {"folder": "$out/logs", "flush_interval_s": 1, "retention_days": 30,
          "reject_images": {"folder": "$out/rejects", "cap_mb": 200}},
 "shifts": [{"name": "early", "start": "06:00"}, {"name": "late", "start": "14:00"},
            {"name": "night", "start": "22:00"}],
 "drift": {"lambda": 0.2, "L": 3, "clear_after": 20, "modes": [1, 2]},
 "timeouts": {"inspection_ms": 500, "frame_ms": 1000}}
EOC
"$bin" run --config "$out/station.json" 2>"$out/station.log" &
pid=$!
i=0
until grep -q "ready" "$out/station.log" 2>/dev/null; do
    i=$((i + 1))
    if [ $i -gt 400 ] || ! kill -0 $pid 2>/dev/null; then
        echo "the station did not start:"; cat "$out/station.log"; exit 1
    fi
    sleep 0.05
done
port=$(sed -n 's/.*PLC link: server mode, port \([0-9]*\).*/\1/p' "$out/station.log" | head -1)
"$bin" plc-sim --connect "127.0.0.1:$port" --parts "$parts" --quiet
kill -TERM $pid
wait $pid
grep -E "drift warning|station stopped" "$out/station.log" | sed 's/^<[0-9]>/  /' | head -8
# where the drift was flagged, and where it first made a part fail
first_drift=$(grep -E '"kind":"(part|drift)"' "$out"/logs/*.jsonl | grep -v '"state":"cleared"' |
    awk '/"kind":"drift"/ {print n + 0; exit} /"kind":"part"/ {n++}')
first_size=$(grep '"kind":"part"' "$out"/logs/*.jsonl |
    awk '/"verdict":"reject","reason":"(size|gauge)"/ {print NR; exit}')
echo "  drift first flagged after part ${first_drift:-(none)}; first part rejected for size or a gauge: ${first_size:-(none)}"
echo

echo "== 7. the shift report =="
"$bin" report --logs "$out/logs" --html "$out/shift-report.html" --csv "$out/shift.csv" || true
echo
echo "calibration:    $out/calibration.json (target sheet: $out/target.svg)"
echo "model:          $out/$family.model.json"
echo "teach report:   $out/teach-report.html"
echo "overlays:       $out/overlays/"
echo "shift logs:     $out/logs/"
echo "reject images:  $out/rejects/"
echo "shift report:   $out/shift-report.html"
echo "modeband is a quality-inspection tool, not a safety device."
