#!/usr/bin/python3
"""tests/io/ref_shiftlog.py - reference check of the shift log writer
(io/shiftlog.h) with an independent JSON reader: Python's json module
(standard library, strict mode: it refuses raw control characters in
strings, as RFC 8259 section 7 requires) and datetime.fromisoformat for the
ISO 8601 times.

    ref_shiftlog.py SHIFTLOG_DRIVER SCRATCH_FOLDER

The driver writes 3000 generated parts across the 14:00 shift boundary and
prints what it gave for each part; this script reads every line back and
checks: each line is one strict JSON object with exactly the members of
io/shiftlog_format.h for its kind; the values equal what was given (numbers
to 9 significant digits, strings exactly, texts longer than 240 bytes cut
on a UTF-8 boundary); parts before 14:00 are in the early file, the rest in
the late file; each shift-end's counts, yield and reasons equal a recount
of that file's part records.
"""
import datetime
import json
import math
import os
import shutil
import subprocess
import sys

N = 3000
TEXT_MAX = 240

PART_KEYS = {"format", "version", "kind", "time", "seq", "frame_seq", "slot",
             "part", "model_checksum", "verdict", "reason", "code", "reasons",
             "pose", "modes", "t2", "residual", "size_mm", "gauges",
             "cycle_ms", "image"}
REASON_KEYS = {"code", "name", "text", "value", "limit"}
LOCATED_KEYS = {"outline", "position", "angle_deg", "depth_mm", "extent_mm"}
START_KEYS = {"format", "version", "kind", "time", "shift", "date",
              "station", "model", "model_checksum", "slot"}
END_KEYS = {"format", "version", "kind", "time", "shift", "date", "parts",
            "passes", "rejects", "faults", "yield", "reasons",
            "drift_signals"}
GAUGE_KEYS = {"name", "value_mm", "nominal_mm", "tol_lo_mm", "tol_hi_mm",
              "ok"}
VERDICTS = {1: "pass", 2: "reject", 3: "fault"}

failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)


def close(a, b):
    if b is None or (isinstance(b, float) and math.isnan(b)):
        return a is None
    return a is not None and abs(a - b) <= 1e-8 * max(1.0, abs(b))


def main():
    driver, scratch = sys.argv[1], sys.argv[2]
    shutil.rmtree(scratch, ignore_errors=True)
    os.makedirs(scratch)
    folder = os.path.join(scratch, "logs")
    out = subprocess.run([driver, folder, str(N)], check=True,
                         capture_output=True, text=True).stdout
    expected = {}
    for line in out.splitlines():
        f = line.split(" ")
        expected[int(f[0])] = {
            "verdict": int(f[1]), "code": int(f[2]), "x": float(f[3]),
            "t2": float(f[4]), "size_mm": float(f[5]),
            "cycle_ms": float(f[6]), "n_reasons": int(f[7]),
            "n_gauges": int(f[8]),
            "text": None if f[9] == "-" else bytes.fromhex(f[9]),
        }
    check(len(expected) == N, "driver printed %d parts" % len(expected))

    files = sorted(os.listdir(folder))
    check(files == ["2026-12-01_early.jsonl", "2026-12-01_late.jsonl",
                    "2026-12-01_night.jsonl"], "files: %r" % files)
    boundary = datetime.datetime(2026, 12, 1, 14, 0,
                                 tzinfo=datetime.timezone.utc)
    seen = set()
    lines_read = 0
    for name in files:
        shift = name[11:-6]
        raw = open(os.path.join(folder, name), "rb").read()
        check(raw.endswith(b"\n"), name + ": does not end with a newline")
        recount = {"parts": 0, "passes": 0, "rejects": 0, "faults": 0}
        reasons = {}
        kinds = []
        last_time = None
        for ln in raw.split(b"\n")[:-1]:
            lines_read += 1
            rec = json.loads(ln.decode("utf-8"))  # strict both ways
            kind = rec["kind"]
            kinds.append(kind)
            check(rec["format"] == "modeband-shiftlog" and
                  rec["version"] == 1, name + ": header")
            t = datetime.datetime.fromisoformat(rec["time"])
            check(t.utcoffset() == datetime.timedelta(0), "offset")
            if last_time is not None:
                check(t >= last_time, name + ": time goes back")
            last_time = t
            if kind == "shift-start":
                check(set(rec) == START_KEYS, "shift-start keys %r" % set(rec))
                check(rec["shift"] == shift and rec["date"] == "2026-12-01",
                      name + ": shift-start names")
                check(rec["station"] == "ref-station" and
                      rec["model"] == "ring.json" and rec["slot"] == 1,
                      name + ": shift-start values")
            elif kind == "part":
                check(set(rec) == PART_KEYS, "part keys %r" % set(rec))
                seq = rec["seq"]
                e = expected[seq]
                check(seq not in seen, "seq %d twice" % seq)
                seen.add(seq)
                check((t < boundary) == (shift == "early"),
                      "part %d in the wrong shift file %s" % (seq, name))
                check(rec["frame_seq"] == 2 * seq + 5, "frame_seq")
                check(rec["part"] == "RG-4030", "part name")
                check(rec["verdict"] == VERDICTS[e["verdict"]],
                      "verdict of %d" % seq)
                check(rec["code"] == e["code"], "code of %d" % seq)
                check(len(rec["reasons"]) == e["n_reasons"], "n reasons")
                check(len(rec["gauges"]) == e["n_gauges"], "n gauges")
                check(close(rec["t2"], e["t2"]), "t2 of %d" % seq)
                check(close(rec["size_mm"], e["size_mm"]), "size of %d" % seq)
                check(close(rec["cycle_ms"], e["cycle_ms"]), "cycle_ms")
                if math.isnan(e["x"]):
                    check(rec["pose"] is None, "pose of %d not null" % seq)
                else:
                    check(set(rec["pose"]) == {"x", "y", "angle", "scale"},
                          "pose keys")
                    check(close(rec["pose"]["x"], e["x"]), "x of %d" % seq)
                check(len(rec["modes"]) <= 8, "modes")
                for g in rec["gauges"]:
                    check(set(g) == GAUGE_KEYS and isinstance(g["ok"], bool),
                          "gauge %r" % g)
                check((rec["image"] is not None) == (e["verdict"] == 2),
                      "image of %d" % seq)
                for r in rec["reasons"]:
                    keys = set(r)
                    located = r["name"] in ("nick", "flash", "gap")
                    want = REASON_KEYS | (LOCATED_KEYS if located else set())
                    check(keys == want, "reason keys %r" % keys)
                if e["text"] is not None:
                    got = rec["reasons"][0]["text"].encode("utf-8")
                    want = e["text"]
                    if len(want) <= TEXT_MAX:
                        check(got == want, "text of %d: %r != %r"
                              % (seq, got, want))
                    else:
                        check(want.startswith(got) and
                              TEXT_MAX - 4 < len(got) <= TEXT_MAX,
                              "long text of %d cut wrongly (%d bytes)"
                              % (seq, len(got)))
                    check(rec["reason"] == rec["reasons"][0]["name"],
                          "primary reason")
                    reasons[rec["reason"]] = reasons.get(rec["reason"], 0) + 1
                else:
                    check(rec["reason"] is None, "reason of a pass")
                recount["parts"] += 1
                recount[{"pass": "passes", "reject": "rejects",
                         "fault": "faults"}[rec["verdict"]]] += 1
            elif kind == "shift-end":
                check(set(rec) == END_KEYS, "shift-end keys %r" % set(rec))
                for k in recount:
                    check(rec[k] == recount[k], "%s: shift-end %s %r != %r"
                          % (name, k, rec[k], recount[k]))
                if recount["parts"]:
                    check(close(rec["yield"],
                                recount["passes"] / recount["parts"]),
                          name + ": yield")
                check(rec["reasons"] == reasons, "%s: reasons %r != %r"
                      % (name, rec["reasons"], reasons))
            else:
                check(False, "unexpected kind " + kind)
        check(kinds[0] == "shift-start" and kinds.count("shift-start") == 1,
              name + ": one shift-start first")
        if shift != "night":
            check(kinds[-1] == "shift-end" and kinds.count("shift-end") == 1,
                  name + ": one shift-end last")
    check(seen == set(range(1, N + 1)), "parts missing: %d of %d"
          % (N - len(seen), N))
    if failures:
        for f in failures[:20]:
            print("FAIL:", f)
        print("%d failures" % len(failures))
        return 1
    print("shift log reference check: %d lines in %d files read back by "
          "Python's json module, %d parts, all members and values match"
          % (lines_read, len(files), len(seen)))
    shutil.rmtree(scratch, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
