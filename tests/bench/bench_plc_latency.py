#!/usr/bin/python3
"""Benchmark: trigger-to-result latency of the PLC link (io/plc.h, server
mode) as a PLC sees it - the time from writing the trigger coil to reading
'result valid' with the new sequence number - measured by a pymodbus client
(Debian's python3-pymodbus) on loopback against plc_station with an instant
fake inspection, so the figure is the link and the station loop alone.
Goal (issue 5): p99 under 10 ms.

Two runs of PARTS parts each (default 1000): the client alone, and with two
other clients (separate processes) reading the block as fast as they can.
Prints p50 / p99 / max; it is a benchmark, not a pass/fail test. Under
ctest it skips itself (exit 77) unless MB_BENCH=1:
    MB_BENCH=1 ctest --test-dir build -R bench_plc_latency -V
or run it directly:
    /usr/bin/python3 tests/bench/bench_plc_latency.py build/tests/io/plc_station [PARTS]
"""
import logging
import os
import re
import signal
import subprocess
import sys
import time

if os.environ.get("MB_BENCH_GATED") and os.environ.get("MB_BENCH") != "1":
    print("bench_plc_latency: skipped (set MB_BENCH=1 to run)")
    sys.exit(77)

logging.basicConfig(level=logging.CRITICAL)
from pymodbus.client import ModbusTcpClient  # noqa: E402

STATION = sys.argv[1]
PARTS = int(sys.argv[2]) if len(sys.argv) > 2 else 1000
VALID = 4

READER = """
import logging, sys, time
logging.basicConfig(level=logging.CRITICAL)
from pymodbus.client import ModbusTcpClient
c = ModbusTcpClient("127.0.0.1", port=int(sys.argv[1]), timeout=2, retries=0)
c.connect()
print("reading", flush=True)
n, end = 0, time.monotonic() + float(sys.argv[2])
while time.monotonic() < end:
    if not c.read_input_registers(0, 16).isError():
        n += 1
print(n, flush=True)
"""


def percentile(xs, p):
    """Nearest-rank percentile of sorted xs."""
    k = max(0, -(-len(xs) * p // 100) - 1)
    return xs[int(k)]


def run(port, parts):
    c = ModbusTcpClient("127.0.0.1", port=port, timeout=2, retries=0)
    c.connect()
    seq = c.read_holding_registers(0, 16).registers[2]
    lat = []
    for _ in range(parts):
        t0 = time.perf_counter()
        c.write_coil(0, True)
        want = (seq + 1) & 0xFFFF
        while True:
            r = c.read_holding_registers(1, 2).registers
            if r[0] & VALID and r[1] == want:
                break
            if time.perf_counter() - t0 > 2.0:
                raise SystemExit("no result within 2 s")
        lat.append((time.perf_counter() - t0) * 1e3)
        seq = want
        c.write_coil(1, True)
    c.close()
    return sorted(lat)


def report(name, lat):
    print(f"{name}: {len(lat)} parts, trigger to result valid "
          f"p50 {percentile(lat, 50):.2f} ms, p99 {percentile(lat, 99):.2f} ms, "
          f"max {lat[-1]:.2f} ms (goal p99 < 10 ms)", flush=True)


p = subprocess.Popen([STATION, "--port", "0", "--inspect-ms", "0"],
                     stdout=subprocess.PIPE, text=True)
drain = None
try:
    port = None
    for line in p.stdout:
        m = re.match(r"READY port=(\d+)", line)
        if m:
            port = int(m.group(1))
            break
    if port is None:
        raise SystemExit("plc_station did not become ready")
    # drain the station's event lines so its stdout never blocks it
    drain = subprocess.Popen(["cat"], stdin=p.stdout, stdout=subprocess.DEVNULL)
    report("alone", run(port, PARTS))
    readers = [subprocess.Popen([sys.executable, "-c", READER, str(port), "600"],
                                stdout=subprocess.PIPE, text=True) for _ in range(2)]
    for rd in readers:
        rd.stdout.readline()  # connected and reading
    t0 = time.monotonic()
    lat = run(port, PARTS)
    dt = time.monotonic() - t0
    for rd in readers:
        rd.send_signal(signal.SIGTERM)
        rd.wait(timeout=10)
    report("with 2 clients reading flat out", lat)
    print(f"  ({dt:.1f} s for the run)")
finally:
    if p.poll() is None:
        p.send_signal(signal.SIGTERM)
    p.wait(timeout=10)
    if drain:
        drain.wait(timeout=10)
