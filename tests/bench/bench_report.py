#!/usr/bin/python3
"""tests/bench/bench_report.py - `modeband report` over a week of shift logs
(issue 7): 21 shifts of 8 h at 5 parts/s, about 3 million part records.
Prints seconds and peak memory (ru_maxrss of the child) of the report with
--html and --csv off and on, and the reader alone with the scanner and with
cJSON. Goal: under 10 s and under 200 MB. Gated: runs only with MB_BENCH=1.

usage: bench_report.py MODEBAND GEN_SHIFTLOG BENCH_SLOG_READ SCRATCH [SHIFTS]
"""
import glob
import os
import resource
import shutil
import subprocess
import sys
import time


def run_measured(cmd, env=None):
    # one child at a time, so RUSAGE_CHILDREN's maxrss is this child's
    # peak as long as it is the largest so far (each run is measured in a
    # fresh python process for that reason)
    code = ("import resource,subprocess,sys,time;t=time.monotonic();"
            "r=subprocess.run(sys.argv[1:],stdout=subprocess.DEVNULL);"
            "dt=time.monotonic()-t;"
            "u=resource.getrusage(resource.RUSAGE_CHILDREN);"
            "print(r.returncode,dt,u.ru_maxrss,u.ru_utime+u.ru_stime)")
    out = subprocess.run([sys.executable, "-c", code] + cmd, capture_output=True,
                         text=True, check=True, env=env).stdout.split()
    # wall seconds are what the goal is about; CPU seconds say how much of
    # it was this program when the machine is shared
    print("    (CPU %.2f s)" % float(out[3]), end="")
    return int(out[0]), float(out[1]), int(out[2]) / 1024.0


def main():
    if os.environ.get("MB_BENCH") != "1":
        print("SKIP: benchmark; set MB_BENCH=1 to run it")
        sys.exit(77)
    modeband, gen, reader, scratch = sys.argv[1:5]
    shifts = int(sys.argv[5]) if len(sys.argv) > 5 else 21
    parts = 5 * 8 * 3600
    shutil.rmtree(scratch, ignore_errors=True)
    os.makedirs(scratch)
    logs = os.path.join(scratch, "logs")
    t = time.monotonic()
    subprocess.run([gen, logs, "--shifts", str(shifts), "--parts", str(parts),
                    "--drift-from", "100000", "--drift-per-part", "0.000002"], check=True)
    files = sorted(glob.glob(os.path.join(logs, "*.jsonl")))
    size = sum(os.path.getsize(f) for f in files)
    print("generated %d shifts, %d part records, %.0f MB of logs in %.0f s"
          % (shifts, shifts * parts, size / 1e6, time.monotonic() - t))
    # warm the page cache once so both runs read from memory alike
    subprocess.run(["cat"] + files, stdout=subprocess.DEVNULL, check=True)
    rc, dt, mb = run_measured([modeband, "report", "--logs", logs, "--quiet"])
    print("\nreport (terminal only):        %.2f s, peak %.1f MB (exit %d)" % (dt, mb, rc))
    one = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    rc1, dt1, mb1 = run_measured([modeband, "report", "--logs", logs, "--quiet"], one)
    print("\nthe same, OPENBLAS_NUM_THREADS=1: %.2f s, peak %.1f MB (exit %d)" % (dt1, mb1, rc1))
    rc2, dt2, mb2 = run_measured([modeband, "report", "--logs", logs, "--quiet",
                                  "--html", os.path.join(scratch, "week.html"),
                                  "--csv", os.path.join(scratch, "week.csv")])
    print("\nreport with --html and --csv:  %.2f s, peak %.1f MB (exit %d)" % (dt2, mb2, rc2))
    print("load average while measuring: %s" % open("/proc/loadavg").read().strip())
    print("goal: under 10 s and under 200 MB: %s"
          % ("met" if rc == 0 and dt < 10 and mb < 200 else "NOT met"))
    subprocess.run([reader] + files, check=True)
    shutil.rmtree(scratch, ignore_errors=True)
    sys.exit(0 if rc == 0 and rc2 == 0 else 1)


if __name__ == "__main__":
    main()
