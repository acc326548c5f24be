#!/usr/bin/python3
"""What a stranger on the training LAN controls, tried against the real `droopline serve` on a
loopback port: request paths (the static route must serve the page's own files and nothing
else), JSON bodies and WebSocket messages nested or sized to hurt, absurd but finite numbers,
wrong types in study inputs, a client that sends a whole oversized body before reading, and a
client that joins in the middle of a disturbance. Every test is bounded in time and count.

    /usr/bin/python3 test_hostile.py DROOPLINE_BINARY SOURCE_DIR
"""
import asyncio
import http.client
import json
import os
import re
import shutil
import socket
import sys
import tempfile
import time
import unittest

import websockets

import test_server
from test_server import TOKEN, Server, run, next_of

SECRET = "SECRET-MARKER-5e1d09c3"


def raw_request(port, target, method="GET", extra=b"", timeout=10):
    """Sends the request line exactly as given (bytes or text) and returns (status, body bytes)."""
    if isinstance(target, str):
        target = target.encode("latin-1")
    with socket.create_connection(("127.0.0.1", port), timeout=timeout) as s:
        s.sendall(method.encode() + b" " + target + b" HTTP/1.1\r\nHost: x\r\nConnection: close\r\n" + extra + b"\r\n")
        data = b""
        while True:
            chunk = s.recv(65536)
            if not chunk:
                break
            data += chunk
    head, _, body = data.partition(b"\r\n\r\n")
    status = int(head.split(b" ", 2)[1]) if head.startswith(b"HTTP/1.1 ") else 0
    return status, body, head


def make_web_root(base):
    """A copy of the page (its files and uPlot's dist) with traps: a secret beside the root, links
    inside it that point out, an npm manifest, a hidden file, a second package."""
    src = os.path.join(test_server.SRC, "web")
    web = os.path.join(base, "web")
    os.makedirs(os.path.join(web, "node_modules", "uplot", "dist"))
    os.makedirs(os.path.join(web, "node_modules", "other"))
    os.makedirs(os.path.join(web, "sub"))
    for name in os.listdir(src):
        p = os.path.join(src, name)
        if os.path.isfile(p):
            shutil.copy(p, web)
    dist = os.path.join(src, "node_modules", "uplot", "dist")
    for name in os.listdir(dist):
        shutil.copy(os.path.join(dist, name), os.path.join(web, "node_modules", "uplot", "dist"))
    with open(os.path.join(base, "secret.txt"), "w") as fh:
        fh.write(SECRET + "\n")
    for rel in ("node_modules/uplot/package.json", "node_modules/other/index.js", "sub/inner.js", ".hidden.js", ".env"):
        with open(os.path.join(web, rel), "w") as fh:
            fh.write(SECRET + " in " + rel + "\n")
    os.symlink(os.path.join(base, "secret.txt"), os.path.join(web, "leak.js"))
    os.symlink("../../../../secret.txt", os.path.join(web, "node_modules", "uplot", "dist", "leak.js"))
    os.symlink("/etc/passwd", os.path.join(web, "node_modules", "uplot", "dist", "passwd.js"))
    os.symlink(base, os.path.join(web, "node_modules", "uplot", "dist", "up"))
    os.symlink("/", os.path.join(web, "root.js"))
    os.symlink("/proc/self/cmdline", os.path.join(web, "cmdline.html"))
    return web


# Each refused; none may answer with a byte of a file outside the page's own.
HOSTILE_PATHS = [
    "//etc/passwd", "///etc/passwd", "////etc/passwd", "/%2fetc/passwd", "/%2Fetc/passwd",
    "/%2f%2fetc%2fpasswd", "//proc/self/cmdline", "/%2fproc%2fself%2fcmdline", "/proc/self/cmdline",
    "/../secret.txt", "/%2e%2e/secret.txt", "/%2E%2E/secret.txt", "/%2e%2E/secret.txt", "/..%2fsecret.txt",
    "/..%2Fsecret.txt", "/%2e%2e%2fsecret.txt", "/.%2e/secret.txt", "/%2e./secret.txt", "/./../secret.txt",
    "/index.html/../../secret.txt", "/a/../../secret.txt", "/node_modules/uplot/dist/../../../../secret.txt",
    "/..\\secret.txt", "/%5c..%5csecret.txt", "/%5C..%5Csecret.txt", "/..%5csecret.txt", "/\\etc\\passwd",
    "/%c0%ae%c0%ae/secret.txt", "/%c0%af..%c0%afsecret.txt", "/%e0%80%ae%e0%80%ae/secret.txt",
    "/%c1%9c..%c1%9csecret.txt", "/%252e%252e/secret.txt", "/%252fetc%252fpasswd", "/..%u2215secret.txt",
    "/%u002e%u002e/secret.txt", "/..;/secret.txt", "/%20../secret.txt", "/...//secret.txt",
    "/index.html%00.js", "/%00", "/index.html%00", "/%00/etc/passwd",
    "/leak.js", "/node_modules/uplot/dist/leak.js", "/node_modules/uplot/dist/passwd.js",
    "/node_modules/uplot/dist/up/secret.txt", "/root.js/etc/passwd", "/root.js", "/cmdline.html",
    "/node_modules/uplot/package.json", "/node_modules/other/index.js", "/node_modules/playwright-core/package.json",
    "/node_modules/.package-lock.json", "/package.json", "/package-lock.json", "/sub/inner.js",
    "/.hidden.js", "/.env", "/.git/config", "/node_modules", "/node_modules/", "/node_modules/uplot/dist/",
    "/node_modules/uplot/dist//uPlot.esm.js", "/index.html/", "/index.html/..", "/%2e", "/.", "/..",
    "/secret.txt", "/token", "/web/index.html",
    "/" + "a" * 600, "/" + "a/" * 300 + "index.html", "/" + "%2e%2e/" * 100 + "etc/passwd",
    "http://evil.example/etc/passwd", "*", "etc/passwd",
]

# The page's own files are still served.
SERVED = ["/", "/index.html", "/app.js", "/openapi.json", "/node_modules/uplot/dist/uPlot.esm.js",
          "/node_modules/uplot/dist/uPlot.min.css"]


class StaticFileTests(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.base = tempfile.mkdtemp(prefix="droopline-web-")
        cls.web = make_web_root(cls.base)
        cls.srv = Server(os.path.join(test_server.SRC, "scenarios", "demo_three_areas.json"), extra=["--web", cls.web])
        with open("/etc/passwd", "rb") as fh:
            cls.passwd = fh.read()

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()
        shutil.rmtree(cls.base, ignore_errors=True)

    def assert_no_leak(self, body, what):
        self.assertNotIn(SECRET.encode(), body, what)
        self.assertNotIn(b"root:x:0:0", body, what)
        self.assertNotIn(TOKEN.encode(), body, what)
        self.assertNotIn(b"--token-file", body, what)
        if self.passwd.strip():
            self.assertNotIn(self.passwd.split(b"\n")[0], body, what)

    def test_every_hostile_path_is_refused_and_leaks_nothing(self):
        self.assertGreaterEqual(len(HOSTILE_PATHS), 40)
        for path in HOSTILE_PATHS:
            for method in ("GET", "HEAD"):
                with self.subTest(path=path[:80], method=method):
                    status, body, head = raw_request(self.srv.port, path, method)
                    self.assertIn(status, (400, 404, 414), (path, body[:200]))
                    self.assert_no_leak(head + body, path)
        # The same through a real client library, which normalises nothing it is given.
        for path in HOSTILE_PATHS[:20]:
            conn = http.client.HTTPConnection("127.0.0.1", self.srv.port, timeout=10)
            conn.putrequest("GET", path, skip_host=True, skip_accept_encoding=True)
            conn.putheader("Host", "x")
            conn.endheaders()
            r = conn.getresponse()
            body = r.read()
            conn.close()
            self.assertNotEqual(r.status, 200, path)
            self.assert_no_leak(body, path)
        s, _, _ = self.srv.request("GET", "/healthz")
        self.assertEqual(s, 200)

    def test_the_page_files_are_served(self):
        for path in SERVED:
            with self.subTest(path=path):
                status, body, head = raw_request(self.srv.port, path)
                self.assertEqual(status, 200, path)
                expected = "index.html" if path == "/" else path.lstrip("/")
                with open(os.path.join(self.web, expected), "rb") as fh:
                    self.assertEqual(body, fh.read())
                self.assertIn(b"X-Content-Type-Options: nosniff", head)
        status, body, head = raw_request(self.srv.port, "/app.js", "HEAD")
        self.assertEqual(status, 200)
        self.assertEqual(body, b"")
        self.assertIn(f"Content-Length: {os.path.getsize(os.path.join(self.web, 'app.js'))}".encode(), head)

    def test_head_on_the_api_answers_as_get_without_the_body(self):
        # RFC 9110, 9.3.2: HEAD is GET without the content; the API's GET routes take it too.
        _, got, ghead = raw_request(self.srv.port, "/api/v1/scenario")
        status, body, head = raw_request(self.srv.port, "/api/v1/scenario", "HEAD")
        self.assertEqual(status, 200)
        self.assertEqual(body, b"")
        self.assertIn(f"Content-Length: {len(got)}".encode(), head)
        self.assertIn(b"Content-Type: application/json", head)
        # A route without GET still refuses HEAD, and says which methods it takes.
        status, body, head = raw_request(self.srv.port, "/api/v1/commands", "HEAD")
        self.assertEqual(status, 405)
        self.assertEqual(body, b"")
        self.assertIn(b"Allow: POST", head)
        status, body, head = raw_request(self.srv.port, "/api/v1/state", "DELETE")
        self.assertEqual(status, 405)
        self.assertIn(b"Allow: GET, HEAD", head)
        status, body, _ = raw_request(self.srv.port, "/api/v1/nothing", "HEAD")
        self.assertEqual((status, body), (404, b""))
        # A HEAD refused from its header (a body over the limit) is still headers only.
        status, body, head = raw_request(self.srv.port, "/api/v1/scenario", "HEAD", b"Content-Length: 99999999\r\n")
        self.assertEqual((status, body), (413, b""))
        self.assertIn(b"Content-Length: ", head)

    def test_a_method_the_server_does_not_implement_gets_501(self):
        # RFC 9110, 9.1: an unrecognized or unimplemented method is 501, on the API and the page alike;
        # 405 stays for a known method on a resource that does not take it.
        for target in ("/api/v1/state", "/", "/api/v1/nothing"):
            for method in ("PROPFIND", "PATCH", "OPTIONS", "BREW"):
                status, body, _ = raw_request(self.srv.port, target, method)
                self.assertEqual(status, 501, (method, target))
                self.assertIn(f'method "{method}" is not implemented', json.loads(body)["error"])
        # 426 names the protocol to upgrade to (RFC 9110, 15.5.22), GET or HEAD.
        for method in ("GET", "HEAD"):
            status, body, head = raw_request(self.srv.port, "/api/v1/stream", method)
            self.assertEqual(status, 426)
            self.assertIn(b"Upgrade: websocket", head)

    def test_errors_quote_the_path_briefly_and_safely(self):
        status, body, _ = raw_request(self.srv.port, "/" + "b" * 400 + ".js")
        self.assertEqual(status, 404)
        msg = json.loads(body)["error"]
        self.assertLess(len(msg), 220)
        status, body, _ = raw_request(self.srv.port, "/%ff%fe%01.js")
        self.assertEqual(status, 404)
        self.assertIn("not served", json.loads(body)["error"])


class DemoServerCase(unittest.TestCase):
    """One server on the demo scenario for the tests of the class."""

    @classmethod
    def setUpClass(cls):
        cls.srv = Server(os.path.join(test_server.SRC, "scenarios", "demo_three_areas.json"))

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()


def nested(depth, inner="1"):
    return "[" * depth + inner + "]" * depth


class BoundedJsonTests(DemoServerCase):
    def alive(self):
        s, _, _ = self.srv.request("GET", "/healthz")
        self.assertEqual(s, 200)
        self.assertIsNone(self.srv.proc.poll())

    def test_deep_nesting_is_refused_by_every_endpoint(self):
        deep = nested(200000)  # 400 KB, under the body limit
        deep_obj = '{"a":' * 100000 + "1" + "}" * 100000
        bodies = {
            ("POST", "/api/v1/commands"): deep,
            ("PUT", "/api/v1/scenario"): deep_obj,
            ("POST", "/api/v1/control"): deep,
            ("POST", "/api/v1/sweeps"): '{"vary": ["nominal_hz=50"], "scenario": ' + deep + "}",
            ("POST", "/api/v1/replays"): deep,
            ("POST", "/api/v1/assess"): deep_obj,
            ("POST", "/api/v1/modes"): deep,
            ("POST", "/api/v1/fits"): '{"unit": "G1", "recording": ' + deep + "}",
            ("POST", "/api/v1/injections"): '{"unit": "G1", "profile": ' + deep + "}",
        }
        for (method, path), body in bodies.items():
            with self.subTest(path=path):
                s, reply, _ = self.srv.request(method, path, body, TOKEN, timeout=30)
                self.assertEqual(s, 400, reply)
                self.assertIn("nested deeper than 64 levels", json.dumps(reply))
                self.alive()
        # 64 levels are fine as far as the gate goes (the endpoint then says what is wrong).
        s, reply, _ = self.srv.request("POST", "/api/v1/commands", nested(63, "{}"), TOKEN)
        self.assertEqual(s, 400)
        self.assertNotIn("nested deeper", json.dumps(reply))

    def test_websocket_messages_are_bounded_and_ids_are_scalars(self):
        async def go():
            async with websockets.connect(self.srv.ws_url(), max_size=2**24) as ws:
                out = {}
                await ws.send('{"type": "commands", "commands": ' + nested(30000) + "}")
                out["deep"] = await next_of(ws, "error")
                await ws.send(json.dumps({"type": "auth", "token": "x", "id": "i" * 65}))
                out["long_id"] = await next_of(ws, "error")
                await ws.send(json.dumps({"type": "auth", "token": "x", "id": {"a": [1, 2]}}))
                out["object_id"] = await next_of(ws, "error")
                await ws.send(json.dumps({"type": "auth", "token": TOKEN, "id": "i" * 64}))
                out["ok_id"] = await next_of(ws, "auth")
                await ws.send(json.dumps({"type": "control", "action": ["pause"], "id": 7}))
                out["bad_action"] = await next_of(ws, "reply")
                await ws.send(json.dumps({"type": "commands", "id": 8,
                                          "commands": {"kind": "load_step", "area": "oskany", "mw": 1e308}}))
                out["absurd"] = await next_of(ws, "reply")
                return out
        out = run(go())
        self.assertIn("nested deeper than 64 levels", out["deep"]["error"])
        self.assertIn("id: must be a number or a string of at most 64 characters", out["long_id"]["error"])
        self.assertIn("id: must be a number", out["object_id"]["error"])
        self.assertEqual(out["ok_id"]["id"], "i" * 64)
        self.assertEqual(out["bad_action"]["id"], 7)
        self.assertEqual(out["bad_action"]["status"], 400)
        self.assertEqual(out["absurd"]["status"], 400)
        self.assertIn("ten times the size of area", json.dumps(out["absurd"]))
        self.alive()


# Absurd but finite values, and wrong types in study inputs: 400 with the path, never 500.
BAD_STUDY = [
    # (method, path, body, status, fragment)
    ("POST", "/api/v1/commands", {"kind": "load_step", "area": "oskany", "mw": 1e308}, 400,
     "command.mw: must lie within +/-"),
    ("POST", "/api/v1/commands", {"kind": "load_ramp", "area": "oskany", "mw": -1e12, "over_s": 5}, 400,
     "ten times the size of area"),
    ("POST", "/api/v1/commands", {"kind": "governor", "unit": "V1", "droop": 1e9}, 400, "command.droop: must lie within [0.001, 1], got 1e+09"),
    ("POST", "/api/v1/commands", {"kind": "governor", "unit": "V1", "deadband_hz": 1e300}, 400,
     "command.deadband_hz: must be at most 5 Hz"),
    ("POST", "/api/v1/commands", {"kind": "setpoint", "unit": "V1", "mw": 100, "ramp_mw_per_s": 1e200}, 400,
     "command.ramp_mw_per_s: must be at most"),
    ("POST", "/api/v1/commands", {"kind": "fluctuation", "area": "oskany", "sigma_mw": 1e9, "tau_s": 2}, 400,
     "command.sigma_mw: must be at most"),
    ("POST", "/api/v1/commands", {"kind": "schedule", "area": "oskany", "mw": 1e300, "over_s": 5}, 400,
     "command.mw: must lie within +/-"),
    ("POST", "/api/v1/commands", {"kind": "schedule", "area": "oskany", "mw": 10, "over_s": 1e300}, 400,
     "command.over_s: must be at most"),
    ("POST", "/api/v1/commands", {"kind": "shed", "area": "oskany", "mw": 1e300}, 400, "command.mw: must lie within +/-"),
    ("POST", "/api/v1/commands", {"kind": "restore", "area": "oskany", "mw": 1e300}, 400, "command.mw: must lie within +/-"),
    ("POST", "/api/v1/commands", {"kind": "unit_stop", "unit": "V1", "ramp_mw_per_s": 1e200}, 400,
     "command.ramp_mw_per_s: must be at most"),
    ("POST", "/api/v1/commands", '{"kind": "load_step", "area": "oskany", "mw": 5, "mw": 6}', 400, "duplicate key"),
    ("POST", "/api/v1/assess", {"name": 5, "limits": {}}, 400, "name: must be a string"),
    ("POST", "/api/v1/assess", {"limits": {"lowest_hz_min": {"value": "49", "source": "x"}}}, 400,
     "limits.lowest_hz_min.value: must be a number"),
    ("POST", "/api/v1/assess", {"limits": [1]}, 400, "limits: must be an object"),
    ("POST", "/api/v1/assess", {"unit_response": [{"units": [1], "deviation_mhz": 200, "within_s": 30,
                                                    "share_min": 1, "source": "x"}]}, 400,
     "unit_response[0].units: must be a list of unit ids"),
    ("POST", "/api/v1/assess", [], 400, "must be a JSON object"),
    ("POST", "/api/v1/assess", "null", 400, "must be a JSON object"),
    ("POST", "/api/v1/sweeps", {"vary": "droop"}, 400, "vary: required, a list"),
    ("POST", "/api/v1/sweeps", {"vary": [5]}, 400, "vary: each entry must be a string"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "metric": 5}, 400, "metric: must be a string"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "metric": "speed"}, 400, "metric: unknown metric"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "sample": -1}, 400, "sample: must be a whole number"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "sample": 1.5}, 400, "sample: must be a whole number"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "seed": "x"}, 400, "seed: must be a whole number"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "scenario": 5}, 400, "scenario: must be an object"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"], "extra": 1}, 400, "\\\"extra\\\": unknown field"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0:0.999:0.000001", "units[1].governor.droop=0:0.999:0.000001"]},
     400, "999001 values, more than the 999 left of a sweep's 1e+06"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.01:0.5:0.001", "units[1].governor.droop=0.01:0.5:0.001"]},
     400, "members, at most 100000 over HTTP"),
    ("POST", "/api/v1/sweeps", {"vary": ["step_s=0.01"] * 17}, 400, "17 fields varied, at most 16"),
    ("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04,1e300"]}, 400, "must lie within [0.001, 1], got 1e+300"),
    ("POST", "/api/v1/fits", {"unit": "G1", "params": ["governor.droop=0.02:0.1"], "starts": 10 ** 12,
                              "recording": {"format": "csv", "text": "t_s"}}, 400, "starts: must be a whole number from 1 to 32"),
    ("POST", "/api/v1/fits", {"unit": "G1", "params": ["governor.droop=1e999:2"],
                              "recording": {"format": "csv", "text": "t_s"}}, 400, "params[0]:"),
    ("POST", "/api/v1/fits", {"unit": "G1", "params": ["governor.droop=0.02:0.1"],
                              "recording": {"format": "comtrade", "cfg": "x", "dat_base64": "@@@@"}}, 400,
     "recording.dat_base64: character"),
    ("POST", "/api/v1/fits", [], 400, "body: must be a JSON object"),
    ("POST", "/api/v1/injections", {"unit": "G1", "profile": {"tests": 5}}, 400, "profile.tests"),
    ("POST", "/api/v1/injections", {"unit": ["G1"], "profile": {}}, 400, "unit: must be a string, the id of a unit of the scenario, got array"),
    ("POST", "/api/v1/modes", {"name": 5}, 400, "name: must be a string"),
    ("POST", "/api/v1/modes", [1, 2], 400, "must be an object"),
    ("GET", "/api/v1/modes?damping_threshold=x", None, 400, "damping_threshold: must be a decimal number"),
    ("GET", "/api/v1/modes?damping_threshold=5", None, 400, "damping_threshold: must lie within [0, 1]"),
    ("GET", "/api/v1/record?from_s=abc", None, 400, "from_s: must be a decimal number"),
    ("GET", "/api/v1/record?from_s=5&to_s=1", None, 400, "from_s must lie before to_s"),
    ("GET", "/api/v1/record?part=exe", None, 400, "part: must be cfg or dat"),
    ("GET", "/api/v1/record?from_s=1e308&to_s=1e309", None, 400, "to_s: must be a decimal number"),
    ("GET", "/api/v1/events?since=-1", None, 400, "since: must be a whole number from 0 to 2^53, got -1"),
    ("GET", "/api/v1/events?since=nan", None, 400, "since"),
    ("GET", "/api/v1/history?from_s=nan", None, 400, "from_s"),
    ("GET", "/api/v1/sweeps/" + "9" * 300, None, 404, "no sweep job"),
    ("POST", "/api/v1/commands", {"kind": "setpoint", "unit": "V1", "mw": 900.0000001}, 400,
     "= [0, 900] of unit \\\"V1\\\", got 900.0000001"),
    ("POST", "/api/v1/commands", {"kind": "governor", "unit": "V1", "droop": 1e-300}, 400,
     "command.droop: must lie within [0.001, 1], got 1e-300"),
    ("POST", "/api/v1/commands", {"kind": "governor", "unit": "V1", "droop": 0.001}, 400,
     "command.droop: 0.001 would make area \\\"vellmark\\\" respond faster"),
    ("POST", "/api/v1/commands", '{"kind": "load_step", "area": "oskany", "mw": 5}\u0000{"kind": "unit_trip"}', 400,
     "a NUL byte, which JSON text cannot hold"),
    ("GET", "/api/v1/events?since=1e20", None, 400, "since: must be a whole number from 0 to 2^53"),
    ("GET", "/api/v1/events?since=1.5", None, 400, "since: must be a whole number from 0 to 2^53"),
    ("GET", "/api/v1/history?from_s=0x10", None, 400, "from_s: must be a decimal number"),
    ("GET", "/api/v1/history?from_s=inf", None, 400, "from_s: must be a decimal number"),
    ("GET", "/api/v1/history?from_s=30&to_s=10", None, 400, "from_s must not lie after to_s"),
    ("POST", "/api/v1/control", {"action": "speed", "speed": 1e308}, 400, "speed: must lie within [0.1, 100]"),
    ("POST", "/api/v1/control", {"action": 5}, 400, "action"),
    ("POST", "/api/v1/control", {"action": "rewind", "to_s": 0.5, "x": 1}, 400,
     "\\\"x\\\": unknown field (expected action, speed, to_s)"),
    ("POST", "/api/v1/control", {"action": "pause", "type": "control"}, 400, "\\\"type\\\": unknown field"),
    ("POST", "/api/v1/control", {"action": "pause", "speed": 5}, 400, "speed: only with \\\"action\\\": \\\"speed\\\""),
    ("POST", "/api/v1/control", {"action": "speed", "speed": 1, "to_s": 3}, 400, "to_s: only with"),
    ("POST", "/api/v1/control", {"action": "speed", "speed": {"a": 1}}, 400, "speed: must be a number from 0.1 to 100, got object"),
    ("POST", "/api/v1/control", {"action": "rewind", "to_s": 1e300}, 400,
     "to_s: must lie within the last 600 s of this lineage and not ahead of now"),
    ("POST", "/api/v1/control", {"action": "rewind", "to_s": -0.01}, 400, "to_s: must lie within the last 600 s"),
    ("POST", "/api/v1/control", {"action": "rewind", "to_s": "5"}, 400, "to_s: must be a number (the simulation time to go back to, s), got string"),
    ("POST", "/api/v1/savepoints", [1], 400, "body must be {\\\"name\\\""),
    ("POST", "/api/v1/savepoints", {"name": ["a"]}, 400, "name: must be a string (cut to 64 bytes)"),
    ("POST", "/api/v1/savepoints", {"nam": "a"}, 400, "\\\"nam\\\": unknown field"),
    ("POST", "/api/v1/savepoints/" + "9" * 300 + "/restore", None, 404, "no save point"),
    ("POST", "/api/v1/savepoints/-1/restore", None, 404, "ids are whole numbers"),
    ("POST", "/api/v1/savepoints/5/restore", None, 404, "no save point 5 in this run"),
]


class StudyInputTests(DemoServerCase):
    def test_table_of_bad_study_inputs(self):
        applied_before = self.srv.metric("droopline_commands_total")
        for method, path, body, status, fragment in BAD_STUDY:
            with self.subTest(method=method, path=path[:60], body=str(body)[:80]):
                s, reply, _ = self.srv.request(method, path, body, TOKEN, timeout=30)
                self.assertEqual(s, status, reply)
                self.assertIn(fragment, json.dumps(reply))
        self.assertEqual(self.srv.metric("droopline_commands_total"), applied_before)  # nothing applied

    def test_a_viewer_is_told_sweeps_are_for_the_instructor(self):
        s, reply, _ = self.srv.request("POST", "/api/v1/sweeps", {"vary": ["units[0].governor.droop=0.04"]})
        self.assertEqual(s, 401)
        self.assertIn("sweeps are for the instructor", reply["error"])
        self.assertNotIn("changes the simulation", reply["error"])


class LingeringCloseTests(DemoServerCase):
    def test_http_client_sending_the_whole_body_first_gets_the_413(self):
        # http.client writes the whole body before it reads anything (so does `requests`): the
        # server answers 413 early, then keeps reading and discarding so the answer arrives.
        for size in (2 << 20, 6 << 20):
            conn = http.client.HTTPConnection("127.0.0.1", self.srv.port, timeout=20)
            conn.request("POST", "/api/v1/commands", body=b"[" + b" " * size + b"]",
                         headers={"Authorization": "Bearer " + TOKEN, "Content-Type": "application/json"})
            r = conn.getresponse()
            body = r.read()
            conn.close()
            self.assertEqual(r.status, 413)
            self.assertIn("larger than 1048576 bytes", json.loads(body)["error"])
        self.assertIsNone(self.srv.proc.poll())

    def test_the_linger_is_bounded(self):
        # A client that keeps sending after the 413 is cut off after a few seconds and MiB.
        with socket.create_connection(("127.0.0.1", self.srv.port), timeout=20) as s:
            s.sendall(f"POST /api/v1/commands HTTP/1.1\r\nHost: x\r\nContent-Length: {1 << 30}\r\n\r\n".encode())
            t0, sent = time.time(), 0
            chunk = b" " * 65536
            try:
                while time.time() - t0 < 15:
                    s.sendall(chunk)
                    sent += len(chunk)
            except (BrokenPipeError, ConnectionResetError, socket.timeout):
                pass
            elapsed = time.time() - t0
        self.assertLess(elapsed, 14)
        self.assertLess(sent, 64 << 20)


class ExpectContinueTests(DemoServerCase):
    """RFC 9110 10.1.1: a client sending `Expect: 100-continue` waits for a 100 before its body
    (curl does so for bodies over 1 MiB); the server answers 100 once the header passed, or the
    final status at once when the header already decides it."""

    def exchange(self, head, body):
        with socket.create_connection(("127.0.0.1", self.srv.port), timeout=5) as s:
            s.sendall(head)
            s.settimeout(0.8)  # a client gives up waiting after about a second and sends anyway
            try:
                first = s.recv(65536)
            except socket.timeout:
                first = b""
            s.settimeout(10)
            data = b""
            if first.startswith(b"HTTP/1.1 100 "):
                s.sendall(body)
                while not data.endswith(b"}") or b"\r\n\r\n" not in data:
                    chunk = s.recv(65536)
                    if not chunk:
                        break
                    data += chunk
            return first, data

    def test_the_header_passing_is_answered_with_100_then_the_reply(self):
        body = json.dumps({"action": "speed", "speed": 1}).encode()
        head = (f"POST /api/v1/control HTTP/1.1\r\nHost: x\r\nAuthorization: Bearer {TOKEN}\r\n"
                f"Expect: 100-Continue\r\nContent-Length: {len(body)}\r\nConnection: close\r\n\r\n").encode()
        first, data = self.exchange(head, body)
        self.assertTrue(first.startswith(b"HTTP/1.1 100 Continue\r\n\r\n"), first[:80])
        self.assertTrue(data.startswith(b"HTTP/1.1 200 "), data[:80])

    def test_a_body_over_the_limit_gets_413_without_100(self):
        head = (f"POST /api/v1/commands HTTP/1.1\r\nHost: x\r\nAuthorization: Bearer {TOKEN}\r\n"
                f"Expect: 100-continue\r\nContent-Length: {64 << 20}\r\n\r\n").encode()
        first, _ = self.exchange(head, b"")
        self.assertTrue(first.startswith(b"HTTP/1.1 413 "), first[:80])
        self.assertIn(b"larger than 1048576 bytes", first)


def demo_with(change):
    """The demo scenario as a dict, changed by `change(dict)`."""
    with open(os.path.join(test_server.SRC, "scenarios", "demo_three_areas.json")) as fh:
        j = json.load(fh)
    change(j)
    return j


class AttackFindingsTests(DemoServerCase):
    """What a fresh-eyes attack found after the first round of fixes."""

    def test_scenarios_that_cannot_be_integrated_are_refused_everywhere(self):
        def stiff_tie(j):
            j["ties"][0]["damping_mw_per_hz"] = 1e7
        def tiny_nominal(j):
            j["nominal_hz"] = 1e-300
        for change, fragment in ((stiff_tie, "couples the areas' speeds with a time constant"),
                                 (tiny_nominal, "nominal_hz: must lie within [10, 1000]")):
            body = demo_with(change)
            for method, path, token in (("PUT", "/api/v1/scenario", TOKEN), ("POST", "/api/v1/replays", TOKEN),
                                        ("POST", "/api/v1/modes", TOKEN)):
                with self.subTest(path=path, fragment=fragment):
                    s, reply, _ = self.srv.request(method, path, body, token, timeout=30)
                    self.assertEqual(s, 400, reply)
                    self.assertIn(fragment, json.dumps(reply))

    def test_several_droop_commands_cannot_add_up_to_an_unstable_area(self):
        # Each of these alone keeps M/beta above five steps; together they would not.
        cmds = [{"kind": "governor", "unit": u, "droop": 0.004} for u in ("V1", "V2", "V3")]
        s, reply, _ = self.srv.request("POST", "/api/v1/commands", cmds, TOKEN)
        self.assertEqual(s, 400, reply)
        self.assertIn("respond faster", json.dumps(reply))
        _, state, _ = self.srv.request("GET", "/api/v1/state")
        for area in state["areas"].values():
            self.assertLess(abs(area["f_hz"] - 50.0), 1.0)

    def test_echoed_input_is_clipped(self):
        huge = "U" * 200000
        for method, path, body, token in (
                ("POST", "/api/v1/commands", {"kind": "unit_trip", "unit": huge}, TOKEN),
                ("POST", "/api/v1/commands", {"kind": huge}, TOKEN),
                ("POST", "/api/v1/assess", {huge: 1}, TOKEN),
                ("POST", "/api/v1/modes", demo_with(lambda j: j["units"][0].update(id=huge)), TOKEN),
                ("GET", "/api/v1/" + "n" * 6000, None, None)):
            with self.subTest(path=path[:40]):
                s, reply, r = self.srv.request(method, path, body, token, timeout=30)
                self.assertIn(s, (400, 404))
                self.assertLess(len(json.dumps(reply)), 4000)
                if s == 400:
                    self.assertIn("more characters", json.dumps(reply))

    def test_authorization_schemes(self):
        for header, status, fragment in (("bearer " + TOKEN, 200, None), ("BEARER  " + TOKEN + " ", 200, None),
                                         ("Basic dXNlcjpwYXNz", 401, "goes in 'Authorization: Bearer TOKEN'"),
                                         ("Bearer", 401, "holds no token"),
                                         ("Bearer  ", 401, "holds no token"),
                                         ("Bearer wrong", 403, "wrong instructor token")):
            with self.subTest(header=header[:20]):
                t0 = time.monotonic()
                s, reply, _ = self.srv.request("GET", "/api/v1/role", headers={"Authorization": header})
                self.assertEqual(s, status, reply)
                if fragment:
                    self.assertIn(fragment, reply["error"])
                else:
                    self.assertEqual(reply["role"], "instructor")
                if status == 403:  # a refused token is answered after a second, and counted
                    self.assertGreaterEqual(time.monotonic() - t0, 0.9)
        # A wrong token on the WebSocket upgrade itself: the same second, and counted.
        def refused_count():
            _, metrics, _ = self.srv.request("GET", "/metrics")
            return int(re.search(rb"droopline_auth_refused_total (\d+)", metrics).group(1))
        before = refused_count()
        t0 = time.monotonic()
        with socket.create_connection(("127.0.0.1", self.srv.port), timeout=10) as s:
            s.sendall(b"GET /api/v1/stream HTTP/1.1\r\nHost: x\r\nUpgrade: websocket\r\nConnection: Upgrade\r\n"
                      b"Sec-WebSocket-Version: 13\r\nSec-WebSocket-Key: dGhlIHNhbXBsZSBub25jZQ==\r\n"
                      b"Authorization: Bearer wrong\r\n\r\n")
            self.assertTrue(s.recv(100).startswith(b"HTTP/1.1 403"))
        self.assertGreaterEqual(time.monotonic() - t0, 0.9)
        self.assertEqual(refused_count(), before + 1)

    def test_head_answers_carry_no_body(self):
        for path in ("/api/v1/nothing", "/api/v1/state", "/healthz", "/nothing.js"):
            with self.subTest(path=path):
                status, body, head = raw_request(self.srv.port, path, "HEAD")
                self.assertEqual(body, b"", path)
                self.assertIn(b"Content-Length:", head)

    def test_websocket_wording(self):
        async def go():
            async with websockets.connect(self.srv.ws_url(), max_size=2**24) as ws:
                out = {}
                await ws.send(b'{"type": "auth"}')
                out["binary"] = await next_of(ws, "error")
                await ws.send(json.dumps({"type": "auth", "token": "nope"}))
                out["auth"] = await next_of(ws, "auth")
                # Within a second of a refused token, the next is not even checked, on this socket
                # or on a new one from the same address.
                await ws.send(json.dumps({"type": "auth", "token": TOKEN}))
                out["too_soon"] = await next_of(ws, "auth")
                async with websockets.connect(self.srv.ws_url(), max_size=2**24) as other:
                    await other.send(json.dumps({"type": "auth", "token": TOKEN}))
                    out["too_soon_elsewhere"] = await next_of(other, "auth")
                await asyncio.sleep(1.1)
                await ws.send(json.dumps({"type": "auth", "token": TOKEN}))
                out["later"] = await next_of(ws, "auth")
                await ws.send(json.dumps({"type": "control", "id": 1, "action": "speed", "speed": 500}))
                out["speed"] = await next_of(ws, "reply")
                await ws.send(json.dumps({"type": "control", "id": 2, "action": "fly"}))
                out["action"] = await next_of(ws, "reply")
                await ws.send(json.dumps({"type": "commands", "id": 3}))
                out["commands"] = await next_of(ws, "reply")
                await ws.send(json.dumps({"type": "control", "id": 4, "action": "speed", "speed": 2, "sped": 3}))
                out["unknown"] = await next_of(ws, "reply")
                await ws.send(json.dumps({"type": "commands", "id": 5, "junk": 1,
                                          "commands": {"kind": "load_step", "area": "oskany", "mw": 1}}))
                out["commands_junk"] = await next_of(ws, "error")
                await ws.send(json.dumps({"type": "auth", "id": 6, "token": TOKEN, "junk": 1}))
                out["auth_junk"] = await next_of(ws, "error")
                return out
        out = run(go())
        self.assertIn("text frames holding JSON", out["binary"]["error"])
        self.assertFalse(out["auth"]["ok"])
        self.assertEqual(out["auth"]["error"], "wrong instructor token")
        for key in ("too_soon", "too_soon_elsewhere"):
            self.assertEqual((out[key]["ok"], out[key]["error"]),
                             (False, "too soon after a refused token or code: wait a second, then try again"))
        self.assertTrue(out["later"]["ok"])
        self.assertEqual(out["speed"]["body"]["error"], "speed: must lie within [0.1, 100], got 500")
        self.assertIn('action: must be one of "pause", "resume", "reset", "speed", "rewind", "end", got "fly"', out["action"]["body"]["error"])
        self.assertIn("commands: required", out["commands"]["body"]["error"])
        # The message's own "type" and "id" are not the route's; any other field is refused as over HTTP.
        self.assertEqual(out["unknown"]["status"], 400)
        self.assertEqual(out["unknown"]["body"]["error"], '"sped": unknown field (expected action, speed, to_s)')
        self.assertEqual(out["commands_junk"]["id"], 5)
        self.assertEqual(out["commands_junk"]["error"], '"junk": unknown field (expected type, id, commands)')
        self.assertEqual(out["auth_junk"]["error"], '"junk": unknown field (expected type, id, token, name)')


def ours(m):
    """The disturbance of the 80 MW load step the late-joiner test makes."""
    return m["type"] == "disturbance" and m["kind"] == "load_step" and abs(abs(m["delta_mw"]) - 80) < 1e-9


class LateJoinerTests(unittest.TestCase):
    def test_a_client_joining_mid_disturbance_sees_its_present_state(self):
        srv = Server(os.path.join(test_server.SRC, "scenarios", "demo_three_areas.json"))
        try:
            async def go():
                async with websockets.connect(srv.ws_url(), max_size=2**24) as early:
                    await next_of(early, "hello")
                    s, body, _ = srv.request("POST", "/api/v1/commands",
                                             {"kind": "load_step", "area": "oskany", "mw": 80}, TOKEN)
                    assert s == 200, body
                    latest = None
                    t0 = time.time()
                    while time.time() - t0 < 5:  # the early client watches the disturbance for 5 s
                        m = json.loads(await asyncio.wait_for(early.recv(), 5))
                        if ours(m):
                            latest = m
                    s, body, _ = srv.request("POST", "/api/v1/control", {"action": "pause"}, TOKEN)
                    assert s == 200
                    await asyncio.sleep(0.3)
                    while True:  # drain what was sent up to the pause
                        try:
                            m = json.loads(await asyncio.wait_for(early.recv(), 0.5))
                        except asyncio.TimeoutError:
                            break
                        if ours(m):
                            latest = m
                    async with websockets.connect(srv.ws_url(), max_size=2**24) as late:
                        hello = await next_of(late, "hello")
                    return latest, hello
            latest, hello = run(go(), timeout=40)
            s, events, _ = srv.request("GET", "/api/v1/events")
        finally:
            srv.stop()
        self.assertIsNotNone(latest)
        mine = [e for e in hello["events"] if ours(e)]
        self.assertEqual(len(mine), 1, "one entry per disturbance")
        # What the late joiner gets is what the early client saw last: not the state at the start.
        for key in ("nadir_hz", "nadir_at_s", "rocof_hz_per_s", "settling_hz", "open"):
            self.assertEqual(mine[0][key], latest[key], key)
        self.assertLess(mine[0]["nadir_hz"], mine[0]["pre_hz"] - 0.01)
        self.assertIsNotNone(mine[0]["rocof_hz_per_s"])
        polled = [e for e in events["events"] if ours(e)]
        self.assertEqual(len(polled), 1)
        self.assertEqual(polled[0]["nadir_hz"], latest["nadir_hz"])


def main():
    test_server.BIN, test_server.SRC = sys.argv[1], sys.argv[2]
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


if __name__ == "__main__":
    main()
