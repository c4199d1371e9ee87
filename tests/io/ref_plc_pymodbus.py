#!/usr/bin/python3
"""Interop check of the PLC link (io/plc.h) against pymodbus, an
independent Modbus TCP implementation (Debian's python3-pymodbus 3.0, sync
client and asyncio server API).

Server mode: plc_station listens, a pymodbus client (the PLC) reads the map
through holding and input registers, measures the heartbeat, runs the
handshake for a dozen parts (trigger coil -> busy -> result valid -> read ->
acknowledge -> cleared), checks sequence, counts and every figure against
the fake inspection's documented formula (tests/io/plc_fake.h, recomputed
here), the exception codes of bad requests, a slot request and a counter
reset.
Client mode: a pymodbus server (the PLC, in a thread) receives the block;
the station reads its trigger, acknowledge and slot there. The server is
then stopped while a part is being inspected and restarted: the station must
back off, reconnect and write the latest result.

Exception codes: Modbus Application Protocol Specification V1.1b3, section 7
(01 ILLEGAL FUNCTION, 02 ILLEGAL DATA ADDRESS, 03 ILLEGAL DATA VALUE) and
section 6 (read holding registers: quantity 1..125).

The station is started by pid, ready when it prints "READY", stopped with
SIGTERM and waited for; every wait has a deadline.
usage: ref_plc_pymodbus.py PLC_STATION"""
import asyncio
import logging
import os
import queue
import re
import signal
import subprocess
import sys
import threading
import time

logging.basicConfig(level=logging.CRITICAL)
logging.getLogger("pymodbus").setLevel(logging.CRITICAL)

from pymodbus.client import ModbusTcpClient  # noqa: E402
from pymodbus.constants import Endian  # noqa: E402
from pymodbus.datastore import (ModbusSequentialDataBlock,  # noqa: E402
                                ModbusServerContext, ModbusSlaveContext)
from pymodbus.mei_message import ReadDeviceInformationRequest  # noqa: E402
from pymodbus.payload import BinaryPayloadDecoder  # noqa: E402
from pymodbus.pdu import ModbusRequest  # noqa: E402
from pymodbus.server.async_io import ModbusTcpServer  # noqa: E402

STATION = sys.argv[1]
failures = []

# status bits, register 1 (io/plc_map.h)
READY, BUSY, VALID, PASS, REJECT, FAULT = 1, 2, 4, 8, 16, 32


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what, flush=True)
    if not ok:
        failures.append(what)
    return ok


class Station:
    """plc_station started by pid; its stdout read by a thread."""

    def __init__(self, args):
        self.proc = subprocess.Popen([STATION] + args, stdout=subprocess.PIPE,
                                     text=True, bufsize=1)
        self.lines = []
        self.q = queue.Queue()
        self.reader = threading.Thread(target=self._read, daemon=True)
        self.reader.start()
        m = self.wait_for(r"^READY .*port=(\d+)", 10)
        if not m:
            self.kill()
            raise SystemExit("plc_station did not become ready")
        self.port = int(m.group(1))

    def _read(self):
        for line in self.proc.stdout:
            self.q.put(line.rstrip("\n"))
        self.q.put(None)

    def wait_for(self, pattern, timeout):
        """First new line matching pattern within timeout (seconds)."""
        rx = re.compile(pattern)
        end = time.monotonic() + timeout
        while True:
            left = end - time.monotonic()
            if left <= 0:
                return None
            try:
                line = self.q.get(timeout=left)
            except queue.Empty:
                return None
            if line is None:
                return None
            self.lines.append(line)
            m = rx.search(line)
            if m:
                return m

    def stop(self):
        """SIGTERM, wait; returns (exit code, STATS dict)."""
        self.proc.send_signal(signal.SIGTERM)
        try:
            rc = self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.kill()
            return None, {}
        m = self.wait_for(r"^STATS (.*)", 5)
        stats = {}
        if m:
            for kv in m.group(1).split():
                k, v = kv.split("=")
                stats[k] = int(v)
        return rc, stats

    def kill(self):
        if self.proc.poll() is None:
            os.kill(self.proc.pid, signal.SIGKILL)
            self.proc.wait(timeout=10)


def expected(k, reject_every, fault_at):
    """The fake inspection's part k, as documented in plc_fake.h."""
    if k == fault_at:
        verdict, reason, fault = 3, 900, 7
    elif reject_every and k % reject_every == 0:
        verdict, reason, fault = 2, 100 + k % 7, 0
    else:
        verdict, reason, fault = 1, 0, 0
    gauges = []
    for i in range(4):
        if i == 0 and k % 7 == 0:
            g = 32767            # +500 mm, clamped
        elif i == 1 and k % 11 == 0:
            g = -32767           # -400 mm, clamped
        elif i == 3 and k % 2 == 0:
            g = -32768           # 0x8000: gauge not measured
        else:
            g = (37 * k + 11 * i) % 201 - 100   # 0.01 mm
        gauges.append(g)
    return verdict, reason, fault, 10 + k % 50, gauges


def decode(regs):
    """The block as a PLC program would decode it: big-endian words,
    32-bit counters high word first, gauges signed 16-bit - decoded by
    pymodbus's BinaryPayloadDecoder, not by our code."""
    d = BinaryPayloadDecoder.fromRegisters(regs[6:10], byteorder=Endian.Big,
                                           wordorder=Endian.Big)
    parts, rejects = d.decode_32bit_uint(), d.decode_32bit_uint()
    g = BinaryPayloadDecoder.fromRegisters(regs[12:16], byteorder=Endian.Big)
    gauges = [g.decode_16bit_int() for _ in range(4)]
    return parts, rejects, gauges


def check_result(regs, k, reject_every, fault_at, parts, rejects, tag):
    verdict, reason, fault, cycle, gauges = expected(k, reject_every, fault_at)
    p, r, g = decode(regs)
    ok = (regs[3] == verdict and regs[4] == reason and regs[11] == fault and
          regs[10] == cycle and g == gauges and p == parts and r == rejects and
          bool(regs[1] & PASS) == (verdict == 1) and
          bool(regs[1] & REJECT) == (verdict != 1))
    check(ok, f"{tag} part {k}: verdict {regs[3]} (want {verdict}), reason "
              f"{regs[4]}, fault {regs[11]}, cycle {regs[10]}, gauges {g}, "
              f"parts {p}/{parts}, rejects {r}/{rejects}")


class UserFunction(ModbusRequest):
    """Function code 65 (0x41, user-defined range): must get exception 01."""
    function_code = 0x41
    _rtu_frame_size = 8

    def encode(self):
        return b"\x01\x02\x03"

    def decode(self, data):
        pass


def exc_code(rsp):
    return getattr(rsp, "exception_code", None) if rsp.isError() else 0


def poll_regs(client, until, timeout, addr=0, count=16, seen=None):
    """Read holding registers until until(regs); seen(regs) on each."""
    end = time.monotonic() + timeout
    regs = None
    while time.monotonic() < end:
        rsp = client.read_holding_registers(addr, count)
        if not rsp.isError():
            regs = rsp.registers
            if seen:
                seen(regs)
            if until(regs):
                return regs, True
    return regs, False


# --------------------------------------------------------------- server mode
def server_mode():
    reject_every, fault_at, n_parts = 4, 6, 12
    st = Station(["--mode", "server", "--port", "0", "--inspect-ms", "50",
                  "--reject-every", str(reject_every), "--fault-at", str(fault_at),
                  "--slot", "2", "--heartbeat-ms", "100", "--max-conn", "4"])
    n_exc = 0
    try:
        c = ModbusTcpClient("127.0.0.1", port=st.port, timeout=2, retries=0)
        check(c.connect(), f"pymodbus client connects to port {st.port}")
        # the map, through holding and input registers
        same = False
        for _ in range(5):
            hr = c.read_holding_registers(0, 16).registers
            ir = c.read_input_registers(0, 16).registers
            if hr == ir:
                same = True
                break
        check(same, f"holding 0-15 == input 0-15: {hr}")
        check(hr[1] == READY, f"status 0x{hr[1]:02x}: ready only")
        check(hr[3] == 0 and hr[2] == 0, "no verdict, sequence 0 before any part")
        check(hr[5] == 2 and c.read_holding_registers(32, 1).registers == [2],
              "active slot 2 in register 5 and 32")
        check(decode(hr)[2] == [-32768] * 4, "gauges 'no value' (0x8000) before any part")
        # heartbeat: +1 every 100 ms, measured over 1 s
        t0, hb0 = time.monotonic(), hr[0]
        steps = []
        last = hb0
        while time.monotonic() - t0 < 1.0:
            hb = c.read_holding_registers(0, 1).registers[0]
            steps.append((hb - last) & 0xFFFF)
            last = hb
            time.sleep(0.02)
        hb1 = c.read_holding_registers(0, 1).registers[0]
        dt = time.monotonic() - t0
        ticks = (hb1 - hb0) & 0xFFFF
        check(abs(ticks - dt / 0.1) <= 3 and max(steps) <= 2,
              f"heartbeat +{ticks} in {dt:.2f} s (100 ms period), steps <= {max(steps)}")
        # the handshake
        parts = rejects = 0
        seq = hr[2]
        for k in range(1, n_parts + 1):
            busy = []
            r = c.write_coil(0, True)
            check(not r.isError(), f"part {k}: trigger written")
            regs, ok = poll_regs(
                c, lambda g: (g[1] & VALID) and g[2] == (seq + 1) & 0xFFFF, 3.0,
                seen=lambda g: busy.append(bool(g[1] & BUSY) and not g[1] & VALID))
            if not check(ok, f"part {k}: result valid with sequence {seq + 1} within 3 s"):
                break
            seq = regs[2]
            check(any(busy), f"part {k}: busy (and not valid) seen while inspecting")
            check(not regs[1] & BUSY, f"part {k}: busy cleared with the result")
            check(c.read_coils(0, 3).bits[:3] == [False, False, False],
                  f"part {k}: trigger coil cleared by the station")
            verdict = expected(k, reject_every, fault_at)[0]
            parts += 1
            rejects += verdict != 1
            check_result(regs, k, reject_every, fault_at, parts, rejects, "server")
            ir = c.read_input_registers(0, 16).registers
            check(ir[1:] == regs[1:], f"part {k}: input registers mirror the result")
            check(not c.write_coil(1, True).isError(), f"part {k}: acknowledge written")
            regs, ok = poll_regs(c, lambda g: not g[1] & VALID, 2.0)
            check(ok and c.read_coils(0, 3).bits[1] is False,
                  f"part {k}: result valid and acknowledge cleared by the station")
        # exception codes (V1.1b3 section 7); nothing read-only may change
        before = c.read_holding_registers(2, 14).registers
        cases = [
            ("read holding 16", c.read_holding_registers(16, 1), 2),
            ("read holding 0..16", c.read_holding_registers(0, 17), 2),
            ("read input 16", c.read_input_registers(16, 1), 2),
            ("read coils 0..3", c.read_coils(0, 4), 2),
            ("write holding 0", c.write_register(0, 7), 2),
            ("write holding 3 (verdict)", c.write_register(3, 1), 2),
            ("write holding 15", c.write_register(15, 7), 2),
            ("write holding 31..32", c.write_registers(31, [1, 2]), 2),
            ("write coil 3", c.write_coil(3, True), 2),
            ("read holding quantity 126", c.read_holding_registers(0, 126), 3),
            ("read discrete inputs (02)", c.read_discrete_inputs(0, 1), 1),
            ("read exception status (07)", c.read_exception_status(), 1),
            ("mask write register (22)", c.mask_write_register(32, 0xFFFF, 0), 1),
            ("read/write registers (23)",
             c.readwrite_registers(read_address=0, read_count=1,
                                   write_address=32, write_registers=[1]), 1),
            ("device identification (43)", c.execute(ReadDeviceInformationRequest()), 1),
            ("user function 65", c.execute(UserFunction()), 1),
        ]
        for what, rsp, want in cases:
            n_exc += 1
            check(exc_code(rsp) == want, f"{what}: exception {exc_code(rsp)} (want {want:02d})")
        after = c.read_holding_registers(2, 14).registers
        check(after == before, "registers 2-15 unchanged by the refused writes")
        # slot request (holding 32) and counter reset (coil 2)
        check(not c.write_register(32, 5).isError(), "requested slot 5 written")
        regs, ok = poll_regs(c, lambda g: g[5] == 5, 2.0)
        check(ok and st.wait_for(r"^SLOT 5$", 2) is not None,
              "station changed over: register 5 = 5")
        check(not c.write_coil(2, True).isError(), "counter reset written")
        regs, ok = poll_regs(c, lambda g: g[6:10] == [0, 0, 0, 0], 2.0)
        check(ok and not c.read_coils(0, 3).bits[2] and
              st.wait_for(r"^RESET$", 2) is not None,
              "shift counters zeroed, reset coil cleared")
        # a second client is served alongside
        c2 = ModbusTcpClient("127.0.0.1", port=st.port, timeout=2, retries=0)
        r1, r2 = c.read_input_registers(0, 16), c2.read_input_registers(0, 16)
        check(not r1.isError() and not r2.isError(), "two clients served at once")
        c2.close()
        c.close()
    finally:
        rc, stats = st.stop()
    check(rc == 0, f"station exits 0 on SIGTERM (got {rc})")
    check(stats.get("exceptions") == n_exc and stats.get("parts") == n_parts,
          f"station counted {stats.get('exceptions')} exception replies "
          f"(sent {n_exc} bad requests) and {stats.get('parts')} parts")


# --------------------------------------------------------------- client mode
class PlcServer:
    """A pymodbus Modbus TCP server in a thread, standing in for the PLC."""

    def __init__(self):
        self.loop = asyncio.new_event_loop()
        self.thread = threading.Thread(target=self.loop.run_forever, daemon=True)
        self.thread.start()
        self.server = self.task = None

    def new_store(self, slot):
        self.store = ModbusSlaveContext(
            co=ModbusSequentialDataBlock(0, [0] * 100),
            di=ModbusSequentialDataBlock(0, [0] * 10),
            hr=ModbusSequentialDataBlock(0, [0] * 300),
            ir=ModbusSequentialDataBlock(0, [0] * 10), zero_mode=True)
        self.store.setValues(3, 200, [slot])
        return self.store

    def _run(self, coro):
        return asyncio.run_coroutine_threadsafe(coro, self.loop).result(10)

    async def _start(self, port):
        ctx = ModbusServerContext(slaves=self.store, single=True)
        self.server = ModbusTcpServer(ctx, address=("127.0.0.1", port),
                                      allow_reuse_address=True)
        self.task = asyncio.ensure_future(self.server.serve_forever())
        await asyncio.wait_for(self.server.serving, 5)
        return self.server.server.sockets[0].getsockname()[1]

    async def _stop(self):
        for h in list(self.server.active_connections.values()):
            h.transport.close()
        await self.server.shutdown()
        self.task.cancel()

    def start(self, port=0):
        return self._run(self._start(port))

    def stop(self):
        self._run(self._stop())

    def hr(self, addr, n):
        return self.store.getValues(3, addr, n)

    def coil(self, addr):
        return self.store.getValues(1, addr, 1)[0]

    def set_coil(self, addr, v):
        self.store.setValues(1, addr, [v])


def wait_until(cond, timeout, step=0.002):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if cond():
            return True
        time.sleep(step)
    return cond()


def client_mode():
    reject_every, fault_at = 2, 0
    BLOCK, TRIG, ACK, SLOT = 100, 10, 11, 200
    plc = PlcServer()
    plc.new_store(1)
    port = plc.start(0)
    st = Station(["--mode", "client", "--peer", f"127.0.0.1:{port}", "--unit", "1",
                  "--block", str(BLOCK), "--trigger-coil", str(TRIG), "--ack", str(ACK),
                  "--slot-reg", str(SLOT), "--slot", "1", "--heartbeat-ms", "100",
                  "--poll-ms", "5", "--timeout-ms", "200", "--backoff-min", "50",
                  "--backoff-max", "400", "--inspect-ms", "400",
                  "--reject-every", str(reject_every)])
    block = lambda: plc.hr(BLOCK, 16)  # noqa: E731
    try:
        check(wait_until(lambda: block()[1] & READY, 3),
              f"station connected and wrote its block to holding {BLOCK}")
        # the block goes out every heartbeat period
        t0, hb0 = time.monotonic(), block()[0]
        time.sleep(1.0)
        hb1, dt = block()[0], time.monotonic() - t0
        ticks = (hb1 - hb0) & 0xFFFF
        check(abs(ticks - dt / 0.1) <= 3, f"block heartbeat +{ticks} in {dt:.2f} s")
        check(block()[5] == 1, "active slot 1 in the block")
        parts = rejects = 0
        seq = block()[2]

        def one_part(k, tag):
            nonlocal parts, rejects, seq
            busy = []
            plc.set_coil(TRIG, 1)
            ok = wait_until(lambda: (busy.append(bool(block()[1] & BUSY)) or True) and
                            (block()[1] & VALID) and block()[2] == (seq + 1) & 0xFFFF, 3)
            if not check(ok, f"{tag} part {k}: result valid, sequence {seq + 1}"):
                return
            regs = block()
            seq = regs[2]
            check(any(busy), f"{tag} part {k}: busy seen in the PLC while inspecting")
            check(plc.coil(TRIG) == 0, f"{tag} part {k}: station cleared the PLC's trigger")
            parts += 1
            rejects += expected(k, reject_every, fault_at)[0] != 1
            check_result(regs, k, reject_every, fault_at, parts, rejects, tag)
            plc.set_coil(ACK, 1)
            check(wait_until(lambda: not block()[1] & VALID and plc.coil(ACK) == 0, 2),
                  f"{tag} part {k}: acknowledge taken, result valid cleared")

        for k in (1, 2, 3):
            one_part(k, "client")
        # slot request read from the PLC
        plc.store.setValues(3, SLOT, [3])
        check(wait_until(lambda: block()[5] == 3, 2) and st.wait_for(r"^SLOT 3$", 2),
              "slot request read from the PLC: block shows slot 3")
        # outage: the PLC goes away while part 4 is inspected
        plc.set_coil(TRIG, 1)
        check(wait_until(lambda: block()[1] & BUSY, 2), "part 4 taken (busy)")
        plc.stop()
        t_down = time.monotonic()
        check(st.wait_for(r"^RESULT part=4 ", 3) is not None,
              "part 4 finished while the PLC was unreachable")
        # stay down long enough to see the back-off grow to its cap
        time.sleep(max(0.0, 1.5 - (time.monotonic() - t_down)))
        parts += 1
        rejects += expected(4, reject_every, fault_at)[0] != 1
        plc.new_store(3)
        t_up = time.monotonic()
        plc.start(port)
        ok = wait_until(lambda: (block()[1] & VALID) and block()[2] == (seq + 1) & 0xFFFF, 3)
        dt = time.monotonic() - t_up
        check(ok and dt < 1.0,
              f"reconnected {dt * 1000:.0f} ms after the PLC returned (cap 400 ms) "
              "and wrote the latest result")
        if ok:
            regs = block()
            seq = regs[2]
            check_result(regs, 4, reject_every, fault_at, parts, rejects, "reconnect")
            plc.set_coil(ACK, 1)
            check(wait_until(lambda: not block()[1] & VALID and plc.coil(ACK) == 0, 2),
                  "acknowledge after reconnect")
        one_part(5, "after reconnect")
    finally:
        rc, stats = st.stop()
        try:
            plc.stop()
        except Exception:  # already stopped
            pass
    check(rc == 0, f"client-mode station exits 0 on SIGTERM (got {rc})")
    # every line up to STATS has been read now; 1.5 s down with 50..400 ms
    # doubling: 100, 200, 400, 400 at least
    delays = [int(x) for x in re.findall(r"next try in (\d+) ms", "\n".join(st.lines))]
    check(len(delays) >= 4 and delays == sorted(delays) and delays[:3] == [100, 200, 400]
          and max(delays) == 400,
          f"reconnect delays double up to the 400 ms cap: {delays}")
    check(stats.get("unsent_results", 0) >= 1 and stats.get("connects", 0) >= 2 and
          stats.get("link_failures", 0) >= 1,
          f"station counted {stats.get('unsent_results')} unsent result(s), "
          f"{stats.get('connects')} connects, {stats.get('link_failures')} link failures")


def client_refused():
    """A trigger address the PLC does not have: every read is refused
    (exception 02 from pymodbus's datastore); the link stays up, the block
    keeps going out, the refusal is logged once, not every poll."""
    plc = PlcServer()
    plc.new_store(0)
    port = plc.start(0)
    st = Station(["--mode", "client", "--peer", f"127.0.0.1:{port}", "--block", "100",
                  "--trigger-coil", "150", "--poll-ms", "5", "--heartbeat-ms", "100"])
    try:
        check(wait_until(lambda: plc.hr(100, 1)[0] >= 2, 3),
              "refused trigger address: block still written every heartbeat")
        hb = plc.hr(100, 1)[0]
        check(wait_until(lambda: plc.hr(100, 1)[0] >= hb + 3, 2), "and the heartbeat keeps going")
    finally:
        rc, stats = st.stop()
        plc.stop()
    refusals = [l for l in st.lines if "refused reading the trigger" in l]
    check(rc == 0 and stats.get("plc_exceptions", 0) >= 20 and len(refusals) == 1 and
          stats.get("link_failures") == 0,
          f"{stats.get('plc_exceptions')} refusals counted, {len(refusals)} logged, "
          f"{stats.get('link_failures')} link failures")


server_mode()
client_mode()
client_refused()
if failures:
    print(f"{len(failures)} check(s) failed")
    sys.exit(1)
print("all checks passed")
