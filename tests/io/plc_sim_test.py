#!/usr/bin/python3
"""End to end: `modeband plc-sim` (our libmodbus PLC) against plc_station in
server mode. Checks the per-part lines and the summary against the fake
inspection's formula (tests/io/plc_fake.h): with --reject-every 5
--fault-at 8, parts 1..20 give 15 pass, 4 reject (5, 10, 15, 20), 1 fault
(8); part 7's first gauge is +500 mm clamped to +327.67 mm, part 11's second
-400 mm clamped to -327.67. Then the exit codes: 1 for a closed port and for
a station that stops answering (SIGSTOP: connect succeeds, reads time out),
2 for usage errors. Processes are started and stopped by pid, every wait
has a deadline.
usage: plc_sim_test.py PLC_STATION MODEBAND"""
import os
import re
import signal
import socket
import subprocess
import sys

STATION, MODEBAND = sys.argv[1], sys.argv[2]
failures = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what, flush=True)
    if not ok:
        failures.append(what)


def start_station(args):
    p = subprocess.Popen([STATION] + args, stdout=subprocess.PIPE, text=True)
    for line in p.stdout:  # readiness line; the station prints it at once
        m = re.match(r"READY port=(\d+)", line)
        if m:
            return p, int(m.group(1))
    p.wait(timeout=10)
    raise SystemExit("plc_station exited before READY")


def stop_station(p):
    if p.poll() is None:
        p.send_signal(signal.SIGTERM)
    try:
        return p.wait(timeout=10)
    except subprocess.TimeoutExpired:
        os.kill(p.pid, signal.SIGKILL)
        p.wait(timeout=10)
        return None


def sim(args, timeout=30):
    return subprocess.run([MODEBAND, "plc-sim"] + args, capture_output=True,
                          text=True, timeout=timeout)


p, port = start_station(["--port", "0", "--reject-every", "5", "--fault-at", "8",
                         "--inspect-ms", "2"])
try:
    r = sim(["--connect", f"127.0.0.1:{port}", "--parts", "20", "--period", "1"])
    print(r.stdout, r.stderr)
    check(r.returncode == 0, f"plc-sim exit 0 (got {r.returncode})")
    lines = [l for l in r.stdout.splitlines() if l.startswith("part ")]
    check(len(lines) == 20, f"20 part lines (got {len(lines)})")
    want = {k: ("fault" if k == 8 else "reject" if k % 5 == 0 else "pass")
            for k in range(1, 21)}
    got = {}
    for l in lines:
        m = re.match(r"part (\d+): seq (\d+) (\w+)", l)
        if m:
            got[int(m.group(1))] = m.group(3)
            check(int(m.group(2)) == int(m.group(1)), f"part {m.group(1)} has sequence {m.group(2)}")
    check(got == want, "verdict of every part as the fake inspection gives it")
    check(" reason 900 fault 7," in lines[7], f"part 8 shows reason 900, fault 7: {lines[7]}")
    check(re.search(r"gauges \+327\.67 ", lines[6]) is not None,
          f"part 7's first gauge clamped to +327.67 mm: {lines[6]}")
    check(re.search(r"gauges \S+ -327\.67 ", lines[10]) is not None,
          f"part 11's second gauge clamped to -327.67 mm: {lines[10]}")
    check(lines[1].endswith(" - mm"), f"part 2 has no fourth gauge: {lines[1]}")
    check("20 of 20 parts: 15 pass, 4 reject, 1 fault" in r.stdout and
          "station counts 20 parts, 5 rejects" in r.stdout, "summary counts")
    m = re.search(r"p50 ([\d.]+) ms, p99 ([\d.]+) ms, max ([\d.]+) ms", r.stdout)
    check(m is not None and 0 < float(m.group(1)) <= float(m.group(2)) <= float(m.group(3)),
          "latency percentiles ordered")
    # usage errors
    for args in (["--parts", "3"], ["--connect", "127.0.0.1", "--parts", "3"],
                 ["--connect", f"127.0.0.1:{port}", "--parts", "0"],
                 ["--connect", f"127.0.0.1:{port}", "--parts", "x"],
                 ["--connect", f"127.0.0.1:{port}", "--parts", "1", "--unit", "300"]):
        r = sim(args)
        check(r.returncode == 2 and "--help" in r.stderr, f"usage error exit 2: {args}")
    check(sim(["--help"]).returncode == 0, "--help exits 0")
    # a station that stops answering: SIGSTOP keeps the socket, nobody reads
    os.kill(p.pid, signal.SIGSTOP)
    try:
        r = sim(["--connect", f"127.0.0.1:{port}", "--parts", "2", "--timeout", "300"])
        check(r.returncode == 1 and "plc-sim:" in r.stderr,
              f"silent station: exit 1 with a sentence ({r.returncode}: {r.stderr.strip()})")
    finally:
        os.kill(p.pid, signal.SIGCONT)
finally:
    rc = stop_station(p)
check(rc == 0, f"station exits 0 on SIGTERM (got {rc})")
# a closed port: take a free one and close it again
s = socket.socket()
s.bind(("127.0.0.1", 0))
closed = s.getsockname()[1]
s.close()
r = sim(["--connect", f"127.0.0.1:{closed}", "--parts", "1", "--timeout", "300"])
check(r.returncode == 1 and "cannot connect" in r.stderr,
      f"closed port: exit 1 ({r.returncode}: {r.stderr.strip()})")
if failures:
    print(f"{len(failures)} check(s) failed")
    sys.exit(1)
print("all checks passed")
