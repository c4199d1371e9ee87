# tests/check.sh - the counters of the shell tests, sourced by each of them
# (. "$(dirname "$0")/../check.sh"): ok counts a check that held, bad one
# that failed and says which. Each test ends with
#     echo "NAME: $pass passed, $fail failed"; [ "$fail" -eq 0 ]
pass=0
fail=0
ok() { pass=$((pass + 1)); }
bad() { fail=$((fail + 1)); echo "FAIL: $*"; }
