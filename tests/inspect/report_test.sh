#!/bin/sh
# tests/inspect/report_test.sh - `modeband report` on bad and odd input:
# torn last line, empty shift, newer format version, model change, garbage
# files, an empty or missing folder, shift/date/time selection, bad options.
# Every case must end with a clear sentence and the right exit code, never
# a crash (exit status > 2 or a signal fails the test).
# usage: report_test.sh MODEBAND GEN_SHIFTLOG SCRATCH
set -u
MB=$1 GEN=$2 S=$3
rm -rf "$S" && mkdir -p "$S" || exit 1
fail=0
expect() { # expect CODE PATTERN CMD...
  code=$1 pat=$2; shift 2
  out=$("$@" 2>&1); rc=$?
  if [ "$rc" -ne "$code" ]; then echo "FAIL: exit $rc (wanted $code): $*"; echo "$out" | tail -5; fail=1; return; fi
  if ! printf '%s' "$out" | grep -q -- "$pat"; then echo "FAIL: no '$pat' from: $*"; echo "$out" | tail -5; fail=1; fi
}
"$GEN" "$S/logs" --shifts 3 --parts 300 --torn --newer --model-change --empty-shift || exit 1
expect 0 "last line is torn" "$MB" report --logs "$S/logs"
expect 0 "newer than this reader" "$MB" report --logs "$S/logs"
expect 0 "model changed" "$MB" report --logs "$S/logs"
expect 0 "no parts in this shift" "$MB" report --logs "$S/logs"
expect 0 "parts 600 " "$MB" report --logs "$S/logs"
# selection by shift and date (file names), and by local time
expect 0 "parts 300 " "$MB" report --logs "$S/logs" --shift early --date 2026-12-01
expect 0 "no log file matched" "$MB" report --logs "$S/logs" --date 2027-01-01
# early shift parts at 5/s from 06:00: 06:00:10 .. 06:00:20 holds 50 parts
expect 0 "parts 50 " "$MB" report --logs "$S/logs" --from 2026-12-01T06:00:10 --to 2026-12-01T06:00:20
# garbage and empty files next to the logs
mkdir -p "$S/bad" && printf 'garbage\n\n{"a":1}\n' > "$S/bad/2026-12-02_x.jsonl" && : > "$S/bad/2026-12-03_y.jsonl"
head -c 100000 /dev/urandom > "$S/bad/2026-12-04_z.jsonl"
expect 0 "not valid shift-log records" "$MB" report --logs "$S/bad" --html "$S/bad.html" --csv "$S/bad.csv"
# every cut of a log file: never a crash
f=$(ls "$S"/logs/*early.jsonl)
mkdir -p "$S/cut"
for n in 1 57 200 1000 5000 20000 50000; do
  head -c $n "$f" > "$S/cut/2026-12-01_early.jsonl"
  "$MB" report --logs "$S/cut" --html "$S/cut.html" > /dev/null 2>&1
  rc=$?; [ $rc -le 1 ] || { echo "FAIL: exit $rc on a log cut at $n bytes"; fail=1; }
done
expect 0 "HTML report" "$MB" report --logs "$S/logs" --html "$S/r.html" --csv "$S/r.csv"
rows=$(($(wc -l < "$S/r.csv") - 1))
[ "$rows" -eq 600 ] || { echo "FAIL: CSV has $rows rows, wanted 600"; fail=1; }
# usage and failures
expect 1 "no-such-folder" "$MB" report --logs "$S/no-such-folder"
expect 2 "required" "$MB" report
expect 2 "--from" "$MB" report --logs "$S/logs" --from yesterday
expect 1 "cannot write" "$MB" report --logs "$S/logs" --html "$S/no/such/dir/r.html"
expect 0 "usage" "$MB" report --help
[ $fail -eq 0 ] && echo "report bad-input checks passed"
exit $fail
