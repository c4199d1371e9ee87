#!/bin/sh
# End-to-end checks of `modeband synth`: exit codes 0/1/2 with one sentence
# on stderr, the files and labels written, and that the same options always
# write the same bytes. usage: synth_cli_test.sh MODEBAND SCRATCH
set -u
mb=$1
tmp=$2
rm -rf "$tmp" && mkdir -p "$tmp"
. "$(dirname "$0")/../check.sh"

# expect CODE DESCRIPTION -- command...
expect() {
    want=$1; what=$2; shift 3
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -eq "$want" ]; then ok; else bad "$what: exit $got, wanted $want"; cat "$tmp/err"; fi
    if [ "$want" -ne 0 ]; then
        n=$(wc -l <"$tmp/err")
        if [ "$n" -eq 1 ]; then ok; else bad "$what: $n lines on stderr, wanted 1"; fi
    fi
}
same() { if cmp -s "$1" "$2"; then ok; else bad "$3: $1 and $2 differ"; fi; }
differ() { if cmp -s "$1" "$2"; then bad "$3: $1 and $2 are the same"; else ok; fi; }
has() { if grep -q -- "$2" "$1"; then ok; else bad "$3: '$2' not in $1"; fi; }

S="--size 640x512"
expect 0 "help" -- "$mb" synth --help
has "$tmp/out" "usage: modeband synth" "help text"
expect 2 "no family" -- "$mb" synth --out "$tmp/x"
expect 2 "no out" -- "$mb" synth --family ring
expect 2 "unknown family" -- "$mb" synth --family donut --out "$tmp/x"
expect 2 "bad lighting" -- "$mb" synth --family ring --lighting side --out "$tmp/x"
expect 2 "bad size" -- "$mb" synth --family ring --size 640 --out "$tmp/x"
expect 2 "bad seed" -- "$mb" synth --family ring --seed -1 --out "$tmp/x"
expect 2 "bad defect list" -- "$mb" synth --family ring --defects nick,dent --out "$tmp/x"
expect 2 "bad format" -- "$mb" synth --family ring --format jpg --out "$tmp/x"
expect 2 "bad count" -- "$mb" synth --family ring --count 0 --out "$tmp/x"
expect 2 "bad noise" -- "$mb" synth --family ring --noise -3 --out "$tmp/x"
expect 2 "stray argument" -- "$mb" synth --family ring --out "$tmp/x" extra
expect 1 "frame too small" -- "$mb" synth --family ring --size 300x300 --out "$tmp/x"
has "$tmp/err" "300x300" "frame too small names the frame"
expect 1 "unwritable folder" -- "$mb" synth --family ring $S --out "$tmp/no/such/dir"

expect 0 "three frames" -- "$mb" synth --family ring --count 3 $S --out "$tmp/a"
has "$tmp/out" "wrote 3 ring frames" "summary"
for i in 1 2 3; do
    if [ -f "$tmp/a/ring_000$i.pgm" ]; then ok; else bad "ring_000$i.pgm missing"; fi
done
if [ "$(head -c 15 "$tmp/a/ring_0001.pgm")" = "$(printf 'P5\n640 512\n255\n')" ]; then ok; else bad "PGM header"; fi
n=$(wc -l <"$tmp/a/labels.jsonl")
if [ "$n" -eq 3 ]; then ok; else bad "labels: $n lines, wanted 3"; fi
has "$tmp/a/labels.jsonl" '"image":"ring_0002.pgm"' "labels name the images"

# the same options write the same bytes; another seed other bytes
expect 0 "again" -- "$mb" synth --family ring --count 3 $S --out "$tmp/b"
same "$tmp/a/ring_0003.pgm" "$tmp/b/ring_0003.pgm" "same options"
same "$tmp/a/labels.jsonl" "$tmp/b/labels.jsonl" "same labels"
expect 0 "other seed" -- "$mb" synth --family ring --count 3 $S --seed 2 --out "$tmp/c"
differ "$tmp/a/ring_0003.pgm" "$tmp/c/ring_0003.pgm" "other seed"
# a part is the same whichever run makes it
expect 0 "start" -- "$mb" synth --family ring --count 1 --start 2 $S --out "$tmp/d"
same "$tmp/a/ring_0003.pgm" "$tmp/d/ring_0003.pgm" "--start"

expect 0 "png, front-lit" -- "$mb" synth --family hose --count 2 --format png --lighting front $S --out "$tmp/e"
if [ "$(head -c 4 "$tmp/e/hose_0001.png" | tail -c 3)" = "PNG" ]; then ok; else bad "PNG magic"; fi
has "$tmp/e/labels.jsonl" '"lighting":"front"' "labels say front-lit"
expect 0 "empty frames" -- "$mb" synth --family lipseal --count 2 --defect-rate 1 --defects empty $S --out "$tmp/f"
has "$tmp/f/labels.jsonl" '"present":false' "empty frames labelled"
has "$tmp/out" "empty: 2" "summary counts empty frames"

echo "synth_cli_test: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
