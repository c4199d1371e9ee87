#!/bin/sh
# End-to-end checks of the modeband command line (teach --points,
# model-info): exit codes 0/1/2, one sentence on stderr, the summary, and
# bad input refused. usage: cli_test.sh MODEBAND DATA_DIR SCRATCH
set -u
mb=$1
data=$2
tmp=$3
rm -rf "$tmp" && mkdir -p "$tmp"
. "$(dirname "$0")/../check.sh"

# expect CODE DESCRIPTION -- command...  (stdout/stderr kept in $tmp/out, $tmp/err)
expect() {
    want=$1; what=$2; shift 3
    "$@" >"$tmp/out" 2>"$tmp/err"
    got=$?
    if [ "$got" -eq "$want" ]; then ok; else bad "$what: exit $got, wanted $want"; cat "$tmp/err"; fi
}
grep_out() { if grep -q -- "$2" "$tmp/$1"; then ok; else bad "$3: '$2' not in $1"; cat "$tmp/$1"; fi; }
lines_of() { n=$(wc -l <"$tmp/$1"); if [ "$n" -eq "$2" ]; then ok; else bad "$3: $n lines in $1, wanted $2"; fi; }

expect 0 "top-level help" -- "$mb" --help
expect 2 "no command" -- "$mb"
expect 2 "unknown command" -- "$mb" frobnicate
lines_of err 1 "unknown command gives one sentence"
for c in teach model-info; do
    expect 0 "$c --help" -- "$mb" $c --help
    grep_out out "usage: modeband $c" "$c --help"
done
expect 2 "teach without --out" -- "$mb" teach --points "$data"
lines_of err 1 "usage error is one sentence"
expect 2 "teach with an unknown option" -- "$mb" teach --points "$data" --out x --bogus
expect 2 "teach with both --variance and --modes" -- "$mb" teach --points "$data" --out x --variance 0.9 --modes 2
expect 2 "teach with a bad number" -- "$mb" teach --points "$data" --out x --variance abc

# the good path
expect 0 "teach the example points" -- "$mb" teach --points "$data" --out "$tmp/m.json"
grep_out out "taught from 30 parts, 4 outlines (64+32+12+12 points)" "teach summary"
grep_out out "modes kept:" "teach summary"
grep_out out "largest training-part T^2:" "teach summary"
expect 0 "model-info" -- "$mb" model-info "$tmp/m.json"
grep_out out "modes kept:" "model-info text"
expect 0 "model-info --json" -- "$mb" model-info --json "$tmp/m.json"
lines_of out 1 "model-info --json is one line"
grep_out out '"samples":30' "model-info --json samples"
expect 0 "teach a fixed number of modes" -- "$mb" teach --points "$data" --out "$tmp/m3.json" --modes 3
grep_out out "modes kept: 3 " "--modes 3"

# bad input: each refused with exit 1 and one sentence naming the problem
mkdir -p "$tmp/few" "$tmp/mixed" "$tmp/nan" "$tmp/empty"
cp "$data/fg3140_01.json" "$data/fg3140_02.json" "$tmp/few/"
expect 1 "fewer than 3 shapes" -- "$mb" teach --points "$tmp/few" --out "$tmp/x.json"
grep_out err "at least 3" "fewer than 3 shapes"
lines_of err 1 "fewer than 3 shapes: one sentence"
cp "$data"/fg3140_0[1-5].json "$tmp/mixed/"
printf 'outline,x,y\n0,0,0\n0,10,0\n0,10,10\n0,0,10\n' >"$tmp/mixed/z_square.csv"
expect 1 "different outline structure" -- "$mb" teach --points "$tmp/mixed" --out "$tmp/x.json"
grep_out err "z_square.csv" "mixed layouts name the file"
cp "$data"/fg3140_0[1-5].json "$tmp/nan/"
sed 's/\[[0-9.]*, \([0-9.]*\)\]/[NaN, \1]/' "$data/fg3140_06.json" >"$tmp/nan/fg3140_06.json"
expect 1 "NaN in a point file" -- "$mb" teach --points "$tmp/nan" --out "$tmp/x.json"
grep_out err "fg3140_06.json" "NaN names the file"
expect 1 "empty folder" -- "$mb" teach --points "$tmp/empty" --out "$tmp/x.json"
expect 1 "missing folder" -- "$mb" teach --points "$tmp/nope" --out "$tmp/x.json"
# identical shapes: zero variance, degenerate
mkdir -p "$tmp/same"
for i in 1 2 3 4; do cp "$data/fg3140_01.json" "$tmp/same/s$i.json"; done
expect 1 "all-identical shapes" -- "$mb" teach --points "$tmp/same" --out "$tmp/x.json"
lines_of err 1 "identical shapes: one sentence"

# model-info on broken models
expect 1 "model-info on a missing file" -- "$mb" model-info "$tmp/none.json"
head -c 200 "$tmp/m.json" >"$tmp/trunc.json"
expect 1 "model-info on a truncated model" -- "$mb" model-info "$tmp/trunc.json"
grep_out err "trunc.json" "truncated model names the file"
sed -E 's/"version":[[:space:]]*1/"version": 99/' "$tmp/m.json" >"$tmp/v99.json"
expect 1 "model-info on an unknown version" -- "$mb" model-info "$tmp/v99.json"
grep_out err "99" "unknown version is named"
expect 2 "model-info without a file" -- "$mb" model-info

echo "cli: $pass passed, $fail failed"
[ "$fail" -eq 0 ]
