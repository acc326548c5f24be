#!/usr/bin/python3
"""Fault tests of `droopline serve`: broken and hostile clients, a full or read-only journal disk,
and a kill in the middle of a stream of commands. The real server on a loopback port; every test
is bounded in time and in count. After each one the real-time loop must still be on its
deadlines (no slip, 99 % of wakes within the bound below) and the server must still serve.

    /usr/bin/python3 test_faults.py DROOPLINE_BINARY SOURCE_DIR
"""
import asyncio
import base64
import http.client
import json
import math
import os
import re
import resource
import shutil
import signal
import socket
import struct
import subprocess
import sys
import tempfile
import threading
import time
import unittest

import websockets

import test_server
from test_server import TOKEN, Server, run

SANITIZED = bool(os.environ.get("DROOPLINE_SANITIZED"))
# The loop's bound: 99 % of wakes within half a step (5 ms) of their time (the next frame; each
# step's deadline with --wake-every-step), 10 ms under the sanitizers, whose instrumentation slows
# every thread, and never a slip (a catch-up longer than a frame's steps and 20 more). Typical figures are far inside it (p99 <= 500 us in the benchmarks).
P99_BOUND_S = 0.01 if SANITIZED else 0.005


def scenario(name):
    return os.path.join(test_server.SRC, "scenarios", name)


def lateness(srv):
    """(bucket bounds, cumulative counts, slips) from /metrics."""
    _, text, _ = srv.request("GET", "/metrics")
    text = text.decode()
    buckets = re.findall(r'^droopline_loop_lateness_seconds_bucket\{le="([^"]+)"\} (\d+)$', text, re.M)
    slips = int(float(re.search(r"^droopline_step_slips_total (\S+)$", text, re.M).group(1)))
    return [float(b) for b, _ in buckets], [int(c) for _, c in buckets], slips


class FaultCase(unittest.TestCase):
    """Each test runs between two lateness snapshots, checked against the bound."""

    def setUp(self):
        self.before = lateness(self.srv)

    def tearDown(self):
        bounds, after, slips = lateness(self.srv)
        _, before, slips_before = self.before
        wakes = [a - b for a, b in zip(after, before)]
        total = wakes[-1]
        self.assertGreater(total, 0, "the loop did not run")
        # 99 % within the bound, the 1 % rounded up: a test's few hundred wakes would otherwise
        # make "p99" mean "every wake", and one scheduler hiccup of a shared machine (seen once in
        # CI: one wake of 99 between 10 and 100 ms late) is not the loop's fault. A loop that is
        # late by habit still fails, and a long stall is a slip, checked next.
        inside = next(n for b, n in zip(bounds, wakes) if b >= P99_BOUND_S)
        allowed = math.ceil(0.01 * total)
        histogram = ", ".join(f"<= {b:g} s: {n}" for b, n in zip(bounds, wakes))
        self.assertLessEqual(total - inside, allowed,
                             f"{total - inside} of {total} wakes later than {P99_BOUND_S} s "
                             f"(at most {allowed}); cumulative wakes {histogram}")
        self.assertEqual(slips, slips_before, "the loop slipped its schedule")
        s, _, _ = self.srv.request("GET", "/healthz")
        self.assertEqual(s, 200)

    def clients(self):
        return self.srv.metric("droopline_clients")

    def wait_clients(self, n, timeout=10):
        deadline = time.time() + timeout
        while time.time() < deadline and self.clients() != n:
            time.sleep(0.1)
        return self.clients()


def ws_handshake(port, rcvbuf=None):
    """A raw WebSocket client socket, past the handshake (the 101 response read exactly)."""
    s = socket.socket()
    if rcvbuf:
        s.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, rcvbuf)
    s.settimeout(10)
    s.connect(("127.0.0.1", port))
    key = base64.b64encode(os.urandom(16)).decode()
    s.sendall((f"GET /api/v1/stream HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nUpgrade: websocket\r\n"
               f"Connection: Upgrade\r\nSec-WebSocket-Key: {key}\r\nSec-WebSocket-Version: 13\r\n\r\n").encode())
    head = b""
    while not head.endswith(b"\r\n\r\n"):
        head += s.recv(1)
    assert head.startswith(b"HTTP/1.1 101"), head
    return s


def client_frame(opcode, payload, fin=True):
    """One masked client frame (RFC 6455 section 5.2)."""
    mask = os.urandom(4)
    n = len(payload)
    head = bytes([(0x80 if fin else 0) | opcode])
    if n < 126:
        head += bytes([0x80 | n])
    elif n < 65536:
        head += bytes([0x80 | 126]) + struct.pack("!H", n)
    else:
        head += bytes([0x80 | 127]) + struct.pack("!Q", n)
    return head + mask + bytes(b ^ mask[i % 4] for i, b in enumerate(payload))


async def count_frames(url, seconds):
    """State frames a well-behaved viewer receives in `seconds`."""
    n = 0
    async with websockets.connect(url, max_size=2**24) as ws:
        end = time.time() + seconds
        while time.time() < end:
            try:
                m = json.loads(await asyncio.wait_for(ws.recv(), max(0.01, end - time.time())))
            except asyncio.TimeoutError:
                break
            n += m["type"] == "frame"
    return n


class ClientFaultTests(FaultCase):
    @classmethod
    def setUpClass(cls):
        cls.srv = Server(scenario("demo_three_areas.json"), frame_rate=20)

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()

    def test_client_reading_one_byte_a_second_is_closed_and_others_are_served(self):
        slow = ws_handshake(self.srv.port, rcvbuf=2048)
        closed_before = self.srv.metric("droopline_slow_clients_closed_total")
        try:
            got = b""
            results = {}
            viewer = threading.Thread(target=lambda: results.update(n=run(count_frames(self.srv.ws_url(), 5))))
            viewer.start()
            deadline = time.time() + 40  # the policy: 10 s of dropped frames in a row, then closed
            while time.time() < deadline:
                try:
                    b = slow.recv(1)
                except (ConnectionResetError, socket.timeout):
                    break
                if not b:
                    break
                got += b
                if self.srv.metric("droopline_slow_clients_closed_total") > closed_before:
                    break
                time.sleep(1.0)
            viewer.join()
            self.assertGreater(self.srv.metric("droopline_slow_clients_closed_total"), closed_before)
            self.assertGreater(self.srv.metric("droopline_frames_dropped_total"), 0)
            self.assertGreaterEqual(results["n"], 90)  # 20 frames/s for 5 s, meanwhile
        finally:
            slow.close()
        self.assertEqual(self.wait_clients(0), 0)

    def test_half_frames_then_gone(self):
        fds = self.srv.open_fds()
        for i in range(30):
            s = ws_handshake(self.srv.port)
            frame = client_frame(0x1, json.dumps({"type": "auth", "token": TOKEN}).encode() * 20)
            s.sendall(frame[: len(frame) // 2])  # half a frame, never finished
            if i % 2:  # half vanish with a reset, half with an orderly close
                s.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0))
            s.close()
        for i in range(30):  # the same for HTTP: half a body
            s = socket.create_connection(("127.0.0.1", self.srv.port), timeout=5)
            s.sendall(b"POST /api/v1/commands HTTP/1.1\r\nHost: x\r\nAuthorization: Bearer " + TOKEN.encode() +
                      b"\r\nContent-Type: application/json\r\nContent-Length: 400\r\n\r\n{\"kind\": \"load_")
            if i % 2:
                s.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0))
            s.close()
        self.assertEqual(self.wait_clients(0), 0)
        deadline = time.time() + 10
        while time.time() < deadline and self.srv.open_fds() > fds:
            time.sleep(0.2)
        self.assertLessEqual(self.srv.open_fds(), fds)
        self.assertEqual(self.srv.metric("droopline_commands_total"), 0)  # no half command applied
        self.assertGreaterEqual(run(count_frames(self.srv.ws_url(), 2)), 35)

    def test_ping_flood(self):
        flooder = ws_handshake(self.srv.port)
        results = {}
        viewer = threading.Thread(target=lambda: results.update(n=run(count_frames(self.srv.ws_url(), 5))))
        viewer.start()
        sent = 0
        flooder.settimeout(0.5)
        end = time.time() + 4
        try:
            burst = client_frame(0x9, b"p" * 125) * 100
            while time.time() < end and sent < 200_000:  # pings as fast as the socket takes them, pongs never read
                try:
                    flooder.sendall(burst)
                    sent += 100
                except socket.timeout:
                    continue  # the server has stopped reading us: back-pressure, as it should
                except (BrokenPipeError, ConnectionResetError):
                    break
        finally:
            viewer.join()
            flooder.close()
        self.assertGreater(sent, 1000)
        self.assertGreaterEqual(results["n"], 90)
        self.assertEqual(self.wait_clients(0), 0)


class ConnectionStormTests(FaultCase):
    @classmethod
    def setUpClass(cls):
        soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
        resource.setrlimit(resource.RLIMIT_NOFILE, (min(hard, 4096), hard))
        cls.srv = Server(scenario("demo_island.json"), extra=["--max-connections", "256"])

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()

    def test_a_thousand_connections_at_once(self):
        async def storm():
            results = {"ok": 0, "refused": 0, "other": []}
            viewer = asyncio.ensure_future(count_frames(self.srv.ws_url(), 6))
            await asyncio.sleep(0.3)

            async def one():
                r, w = await asyncio.open_connection("127.0.0.1", self.srv.port)
                return r, w
            conns = await asyncio.gather(*[one() for _ in range(1000)], return_exceptions=True)
            await asyncio.sleep(0.5)

            async def use(c):
                if isinstance(c, Exception):
                    results["other"].append(repr(c))
                    return
                r, w = c
                try:
                    head = await asyncio.wait_for(r.read(12), 0.5)  # refused ones are told at once
                except asyncio.TimeoutError:
                    w.write(b"GET /healthz HTTP/1.1\r\nHost: x\r\nConnection: close\r\n\r\n")
                    await w.drain()
                    head = await asyncio.wait_for(r.read(12), 10)
                if head.startswith(b"HTTP/1.1 200"):
                    results["ok"] += 1
                elif head.startswith(b"HTTP/1.1 503"):
                    results["refused"] += 1
                else:
                    results["other"].append(head)
                w.close()
            await asyncio.gather(*[use(c) for c in conns])
            results["frames"] = await viewer
            return results
        res = run(storm(), timeout=60)
        self.assertEqual(res["other"], [])
        self.assertEqual(res["ok"] + res["refused"], 1000)
        self.assertGreaterEqual(res["ok"], 200)      # the limit's worth served (the viewer holds one)
        self.assertLessEqual(res["ok"], 256)
        self.assertGreaterEqual(res["refused"], 744)
        self.assertGreaterEqual(res["frames"], 100)  # the viewer kept its 20 frames/s meanwhile
        time.sleep(0.5)
        s, _, _ = self.srv.request("GET", "/healthz")
        self.assertEqual(s, 200)


def can_mount():
    if os.geteuid() != 0 or not shutil.which("mount"):
        return False
    d = tempfile.mkdtemp(prefix="droopline-mnt-")
    ok = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", d], capture_output=True).returncode == 0
    if ok:
        subprocess.run(["umount", d])
    os.rmdir(d)
    return ok


LOAD = {"kind": "load_step", "area": "quellan", "mw": 1.5}


class JournalDiskTests(unittest.TestCase):
    """The journal's disk fills up or turns read-only under a running session: commands are then
    refused with 507 or 500 and a message that says why, nothing is applied, and once the disk is
    writable again everything acknowledged, and only that, replays."""

    def commands_total(self, srv):
        return srv.metric("droopline_commands_total")

    def replayed(self, srv, journal):
        out = tempfile.mkdtemp()
        subprocess.run([test_server.BIN, "replay", journal, "--out", out, "--quiet"], check=True, timeout=60)
        with open(os.path.join(out, "commands.jsonl")) as fh:
            return [json.loads(line) for line in fh if line.strip()]

    def test_full_disk_device(self):
        # /dev/full answers every write with ENOSPC: the one full disk every machine has.
        proc = subprocess.run([test_server.BIN, "serve", "--scenario", scenario("demo_island.json"), "--listen",
                               f"127.0.0.1:{test_server.free_port()}", "--journal", "/dev/full"],
                              capture_output=True, text=True, timeout=20)
        self.assertNotEqual(proc.returncode, 0)  # the session cannot even journal its scenario
        self.assertIn("/dev/full", proc.stdout + proc.stderr)
        self.assertIn("No space left on device", proc.stdout + proc.stderr)

    def test_journal_that_cannot_be_opened_stops_the_start(self):
        missing = os.path.join(tempfile.mkdtemp(), "no", "such", "dir", "j.jsonl")
        proc = subprocess.run([test_server.BIN, "serve", "--scenario", scenario("demo_island.json"), "--listen",
                               f"127.0.0.1:{test_server.free_port()}", "--journal", missing],
                              capture_output=True, text=True, timeout=20)
        self.assertEqual(proc.returncode, 1)
        self.assertIn(f'cannot open journal "{missing}" for appending: No such file or directory',
                      proc.stdout + proc.stderr)

    def test_token_file_that_never_ends_stops_the_start(self):
        # /dev/zero is one endless line: read as a stream it would take all of memory.
        proc = subprocess.run([test_server.BIN, "serve", "--scenario", scenario("demo_island.json"), "--listen",
                               f"127.0.0.1:{test_server.free_port()}", "--token-file", "/dev/zero"],
                              capture_output=True, text=True, timeout=20)
        self.assertEqual(proc.returncode, 2)
        self.assertIn('cannot read the token file "/dev/zero"', proc.stdout + proc.stderr)

    @unittest.skipUnless(can_mount(), "needs root and mount(8) for a small tmpfs")
    def test_disk_fills_and_turns_read_only_during_the_session(self):
        mnt = tempfile.mkdtemp(prefix="droopline-mnt-")
        subprocess.run(["mount", "-t", "tmpfs", "-o", "size=256k", "tmpfs", mnt], check=True)
        srv = None
        try:
            journal = os.path.join(mnt, "journal.jsonl")
            srv = Server(scenario("demo_island.json"), journal=journal)
            acked = []

            def command(mw):
                s, body, _ = srv.request("POST", "/api/v1/commands", dict(LOAD, mw=mw), TOKEN)
                if s == 200:
                    acked.append((body["step"], mw))
                return s, body

            self.assertEqual(command(1.0)[0], 200)
            # Fill the disk to the last byte.
            fd = os.open(os.path.join(mnt, "filler"), os.O_WRONLY | os.O_CREAT)
            try:
                while os.write(fd, b"\0" * 4096) > 0:
                    pass
            except OSError:
                pass  # ENOSPC: full
            os.close(fd)
            # The journal's last page may still have room for a few records: the disk is full
            # when one does not fit.
            for i in range(200):
                applied = self.commands_total(srv)
                s, body = command(2.0 + i / 1000)
                if s != 200:
                    break
            self.assertEqual(s, 507, body)
            self.assertIn("command refused, nothing applied", body["error"])
            self.assertIn("No space left on device", body["error"])
            self.assertEqual(self.commands_total(srv), applied)
            s, body, _ = srv.request("POST", "/api/v1/control", {"action": "reset"}, TOKEN)
            self.assertEqual(s, 507, body)  # a reset needs its record too
            self.assertIn("reset refused", body["error"])
            os.remove(os.path.join(mnt, "filler"))
            self.assertEqual(command(3.0)[0], 200)  # space again: journaling resumes

            # Read-only (the file is opened for each record, so the remount succeeds).
            subprocess.run(["mount", "-o", "remount,ro", mnt], check=True)
            s, body = command(4.0)
            self.assertEqual(s, 500, body)
            self.assertIn("Read-only file system", body["error"])
            subprocess.run(["mount", "-o", "remount,rw", mnt], check=True)
            self.assertEqual(command(5.0)[0], 200)
            self.assertEqual(srv.stop(), 0)

            got = [(b["step"], b["commands"][0]["mw"]) for b in self.replayed(srv, journal)]
            self.assertEqual(got, acked)
            self.assertEqual([mw for _, mw in got if mw in (1.0, 3.0, 5.0)], [1.0, 3.0, 5.0])
        finally:
            if srv:
                srv.stop()
            subprocess.run(["umount", mnt])
            os.rmdir(mnt)


class KillTests(unittest.TestCase):
    def test_sigkill_during_a_stream_of_commands_then_replay(self):
        """Two clients post commands as fast as they are answered; the server is killed with
        SIGKILL. The journal then replays every acknowledged command at its acknowledged step; the
        only others it may hold are the (at most one per client) requests whose answer was lost in
        flight: those were on disk, their clients just never heard so."""
        srv = Server(scenario("demo_three_areas.json"), extra=["--speed", "5"])
        sent, acked, lock = {}, {}, threading.Lock()
        stop = threading.Event()

        def client(parity):
            k = parity
            while not stop.is_set() and k < 20000:
                mw = round((1 if k % 4 < 2 else -1) * (1 + k / 1e4), 6)
                with lock:
                    sent[k] = mw
                try:
                    s, body, _ = srv.request("POST", "/api/v1/commands", dict(LOAD, area="oskany", mw=mw), TOKEN,
                                             timeout=5)
                except (OSError, http.client.HTTPException):
                    return
                if s == 200:
                    with lock:
                        acked[k] = body["step"]
                k += 2

        threads = [threading.Thread(target=client, args=(p,)) for p in (0, 1)]
        for t in threads:
            t.start()
        time.sleep(2.0)
        srv.proc.send_signal(signal.SIGKILL)
        stop.set()
        for t in threads:
            t.join(timeout=20)
        srv.proc.wait(timeout=10)
        self.assertGreater(len(acked), 20)

        out = tempfile.mkdtemp()
        subprocess.run([test_server.BIN, "replay", srv.journal, "--out", out, "--quiet"], check=True, timeout=120)
        with open(os.path.join(out, "commands.jsonl")) as fh:
            batches = [json.loads(line) for line in fh if line.strip()]
        by_mw = {mw: k for k, mw in sent.items()}
        replayed = {}
        for b in batches:
            mw = b["commands"][0]["mw"]
            self.assertIn(mw, by_mw, f"replay holds a command never sent: {b}")
            replayed[by_mw[mw]] = b["step"]
        for k, step in acked.items():
            self.assertEqual(replayed.get(k), step, f"acknowledged command {k} (step {step}) replays as {replayed.get(k)}")
        extra = set(replayed) - set(acked)
        self.assertLessEqual(len(extra), 2, f"unacknowledged commands in the replay: {sorted(extra)}")


def main():
    test_server.BIN, test_server.SRC = sys.argv[1], sys.argv[2]
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


def thread_priorities(pid):
    """{thread id: (niceness, scheduling policy)} of a process, from /proc (proc(5): stat fields
    19 and 41, counted after the command name's closing parenthesis)."""
    out = {}
    for tid in os.listdir(f"/proc/{pid}/task"):
        with open(f"/proc/{pid}/task/{tid}/stat") as fh:
            fields = fh.read().rsplit(")", 1)[1].split()
        out[int(tid)] = (int(fields[16]), int(fields[38]))
    return out


class LoopPriorityTests(unittest.TestCase):
    """The loop goes first: at SCHED_FIFO with the privilege, else the network and worker threads
    yield to it by niceness (README, Live service)."""

    def check(self, srv, expect_realtime):
        realtime = srv.metric("droopline_loop_realtime")
        threads = thread_priorities(srv.proc.pid)
        fifo = [tid for tid, (_, policy) in threads.items() if policy == 1]  # SCHED_FIFO
        if expect_realtime is not None:
            self.assertEqual(realtime, 1 if expect_realtime else 0, threads)
        if realtime == 1:
            self.assertEqual(len(fifo), 1, threads)  # the loop, and only the loop
            self.assertEqual(threads[srv.proc.pid][0], 0, threads)
        else:
            self.assertEqual(fifo, [], threads)
            self.assertEqual(threads[srv.proc.pid][0], 5, threads)  # the main thread runs the network
            self.assertIn(0, [nice for nice, _ in threads.values()], threads)  # the loop kept its own

    def test_as_started(self):
        srv = Server(scenario("demo_island.json"))
        try:
            self.check(srv, None)
        finally:
            srv.stop()

    def test_without_the_privilege(self):
        if os.geteuid() != 0 or not shutil.which("setpriv"):
            self.skipTest("needs root and setpriv to drop the privilege")
        wrapper = os.path.join(tempfile.mkdtemp(prefix="droopline-prio-"), "unprivileged")
        with open(wrapper, "w") as fh:
            fh.write(f'#!/bin/sh\nexec setpriv --bounding-set=-sys_nice --inh-caps=-sys_nice "{test_server.BIN}" "$@"\n')
        os.chmod(wrapper, 0o755)
        binary, test_server.BIN = test_server.BIN, wrapper
        try:
            srv = Server(scenario("demo_island.json"))
        finally:
            test_server.BIN = binary
        try:
            self.check(srv, False)
        finally:
            srv.stop()


if __name__ == "__main__":
    main()
