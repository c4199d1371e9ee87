#!/bin/sh
# Station benchmark (issue 5): sustained rate and resident memory of
# `modeband run`. Prints figures; not a pass/fail test. Skips (77) unless
# MB_BENCH=1.
#  - every-frame mode on a replay of 1280x1024 synthetic frames (the camera
#    as fast as the station takes frames): parts per second and peak RSS
#    after 1,000 and after 100,000 parts (MB_BENCH_PARTS overrides 100000);
#  - free-running mode on the live synthetic line (parts travel across the
#    field, each found as it enters and inspected once): parts per second
#    (MB_BENCH_FREE_PARTS parts, default 3000).
# usage: bench_station.sh MODEBAND SCRATCH
set -u
[ "${MB_BENCH:-0}" = 1 ] || { echo "bench_station: set MB_BENCH=1 to run"; exit 77; }
mb=$1
tmp=$2
big=${MB_BENCH_PARTS:-100000}
rm -rf "$tmp" && mkdir -p "$tmp"
"$mb" synth --family flange --count 30 --seed 61 --out "$tmp/good" >/dev/null
"$mb" teach --images "$tmp/good" --out "$tmp/m.json" --mm-per-px 0.1 >/dev/null
"$mb" synth --family flange --count 20 --seed 62 --defect-rate 0.1 --out "$tmp/line" >/dev/null
conf() { # $1 camera, $2 trigger
cat >"$tmp/station.json" <<EOC
{"format": "modeband-station", "version": 1, "station": "bench",
 "camera": $1, "trigger": "$2",
 "slots": [{"slot": 1, "model": "$tmp/m.json"}], "active_slot": 1,
 "plc": {"mode": "none"},
 "logs": {"folder": "$tmp/logs", "flush_interval_s": 1, "retention_days": 0},
 "shifts": [{"name": "all", "start": "00:00"}],
 "timeouts": {"inspection_ms": 1000, "frame_ms": 2000}}
EOC
}
# run N: wall seconds and peak RSS (kB, VmHWM sampled while it runs)
run() {
    rm -rf "$tmp/logs"
    start=$(date +%s.%N)
    OPENBLAS_NUM_THREADS=1 "$mb" run --config "$tmp/station.json" --parts "$1" 2>"$tmp/err.txt" &
    p=$!
    hwm=0
    while kill -0 $p 2>/dev/null; do
        h=$(sed -n 's/^VmHWM:[[:space:]]*\([0-9]*\).*/\1/p' /proc/$p/status 2>/dev/null)
        [ -n "$h" ] && hwm=$h
        sleep 0.2
    done
    wait $p
    end=$(date +%s.%N)
    wall=$(echo "$end $start" | awk '{print $1 - $2}')
    echo "$wall $hwm"
}
conf '{"source": "replay", "width": 1280, "height": 1024, "replay": {"folder": "'$tmp/line'", "fps": 0, "loop": true}}' every
set -- $(run 1000)
echo "every-frame mode, replay 1280x1024: 1000 parts in $1 s ($(echo "$1" | awk '{printf "%.0f", 1000 / $1}') parts/s), peak RSS $(($2 / 1024)) MB"
set -- $(run "$big")
echo "every-frame mode, replay 1280x1024: $big parts in $1 s ($(echo "$1 $big" | awk '{printf "%.0f", $2 / $1}') parts/s), peak RSS $(($2 / 1024)) MB"
# free run: the belt at 600 px per frame puts a part in about 3 frames (one
# entering, one whole, one leaving); the source draws ahead in its own
# thread, as a camera exposes while the station works
conf '{"source": "synth", "width": 1280, "height": 1024, "synth": {"family": "flange", "seed": 63, "defect_rate": 0.05, "speed_px": 600, "fps": 0}}' free
n_free=${MB_BENCH_FREE_PARTS:-3000}
set -- $(run "$n_free")
fpp=$(sed -n 's/.*: \([0-9.]*\) frames per part.*/\1/p' "$tmp/err.txt")
unseen=$(cat "$tmp"/logs/*.jsonl | grep '"kind":"part"' | grep -c '"verdict":"fault"')
echo "free-running mode, live synthetic line 1280x1024 (600 px per frame, $fpp frames per part): $n_free parts in $1 s ($(echo "$1 $n_free" | awk '{printf "%.0f", $2 / $1}') parts/s, start-up included), $unseen parts not seen whole, peak RSS $(($2 / 1024)) MB"
