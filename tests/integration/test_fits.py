#!/usr/bin/python3
"""Fits and injection tests over HTTP against the real server, with the command line as the
independent reference: a fit of the shipped example (scenarios/validation/plant.json and the first
two minutes of its recorded event) posted as CSV text and as a binary COMTRADE record in base64
gives the values `droopline fit --json` gives for the same recording, seed and starts; a long fit
is cancelled; a second one while one runs is refused; bad bodies are refused naming their field;
the shipped injection profile passes or fails as `droopline inject --json` says. Each fit takes
seconds (two minutes of recording, two starts).

    /usr/bin/python3 test_fits.py DROOPLINE_BINARY SOURCE_DIR
"""
import base64
import json
import os
import struct
import subprocess
import sys
import tempfile
import time
import unittest
import xml.etree.ElementTree as ET

import test_server
from test_server import TOKEN, Server

# The README's fit example ("Fitting a unit model"), with two starts to keep each fit short.
PARAMS = ["governor.droop=0.02:0.1", "governor.lag_s=0.05:1", "turbine.reheat_s=2:12"]
STARTS, SEED = 2, 1
SAMPLES = 1201  # the first 120 s at 10 samples a second: the 100 MW loss at 60 s is inside


def validation(name):
    return os.path.join(test_server.SRC, "scenarios", "validation", name)


def short_csv():
    with open(validation("recorded_event.csv")) as fh:
        return "".join(fh.readlines()[:SAMPLES + 1])


def short_comtrade():
    """The shipped ASCII record cut to SAMPLES, and the same samples as a 2013 BINARY32 record:
    (ascii cfg, ascii dat, binary cfg, binary dat bytes). The binary layout (uint32 sample number and
    timestamp, int32 analog values, little-endian) and the 2013 time code and time quality lines are
    IEEE C37.111 as recalled from memory; the raw integers are the ASCII file's, so both records hold
    the same values."""
    with open(validation("recorded_event.cfg"), newline="") as fh:
        cfg = fh.read()
    with open(validation("recorded_event.dat"), newline="") as fh:
        rows = fh.read().splitlines()[:SAMPLES]
    assert ",6001" in cfg and "\nASCII" in cfg and ",1999" in cfg.splitlines()[0]
    ascii_cfg = cfg.replace(",6001", f",{SAMPLES}")
    eol = "\r\n" if "\r\n" in cfg else "\n"
    lines = ascii_cfg.rstrip("\r\n").split(eol)
    lines[0] = lines[0].rsplit(",", 1)[0] + ",2013"
    lines[lines.index("ASCII")] = "BINARY32"
    binary_cfg = eol.join(lines + ["0,0", "0,0"]) + eol
    dat = b""
    for row in rows:
        f = [int(x) for x in row.split(",")]
        dat += struct.pack("<II", f[0], f[1]) + struct.pack(f"<{len(f) - 2}i", *f[2:])
    return ascii_cfg, eol.join(rows) + eol, binary_cfg, dat


class FitTests(unittest.TestCase):

    @classmethod
    def setUpClass(cls):
        cls.srv = Server(validation("plant.json"))
        cls.dir = tempfile.mkdtemp(prefix="droopline-fits-")
        cls.csv = short_csv()
        cls.csv_path = os.path.join(cls.dir, "short.csv")
        with open(cls.csv_path, "w") as fh:
            fh.write(cls.csv)

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()

    def body(self, **extra):
        b = {"unit": "QH1", "params": PARAMS, "starts": STARTS, "seed": SEED,
             "recording": {"format": "csv", "text": self.csv}}
        b.update(extra)
        return b

    def cli_fit(self, recording):
        args = [test_server.BIN, "fit", validation("plant.json"), "--unit", "QH1", "--measured", recording,
                "--starts", str(STARTS), "--seed", str(SEED), "--json"]
        for p in PARAMS:
            args += ["--param", p]
        out = subprocess.run(args, check=True, capture_output=True, text=True, timeout=120)
        return json.loads(out.stdout)

    def wait(self, job, timeout=120):
        deadline = time.time() + timeout
        while time.time() < deadline:
            s, st, _ = self.srv.request("GET", f"/api/v1/fits/{job}")
            self.assertEqual(s, 200, st)
            if st["status"] != "running":
                return st
            time.sleep(0.1)
        self.fail(f"fit {job} still running after {timeout} s")

    def fit_over_http(self, body):
        s, st, _ = self.srv.request("POST", "/api/v1/fits", body, TOKEN)
        self.assertEqual(s, 202, st)
        self.assertEqual((st["kind"], st["status"], st["unit"]), ("fit", "running", "QH1"))
        # The budget: starts x 150 evaluations and 2 + 2 x 3 final runs.
        self.assertEqual(st["total"], STARTS * 150 + 8)
        done = self.wait(st["id"])
        self.assertEqual(done["status"], "done", done)
        self.assertEqual(done["done"], done["total"])
        self.assertEqual(done["result"], f"/api/v1/fits/{st['id']}/result")
        s, result, _ = self.srv.request("GET", done["result"], None, TOKEN)
        # The result carries the plant's measured output: the instructor's only.
        s_viewer, refused, _ = self.srv.request("GET", done["result"])
        self.assertEqual(s_viewer, 401, refused)
        self.assertIn("instructor", refused["error"])
        self.assertEqual(s, 200, result)
        return st["id"], result

    def assert_same_fit(self, http, cli):
        # Same recording, seed and starts: the searches are deterministic, so every figure is equal.
        for key in ("unit", "params", "uncertainty", "initial", "rmse_before", "rmse_after", "r2_before", "r2_after",
                    "correlation", "samples", "evaluations", "warnings", "fragment"):
            self.assertEqual(http[key], cli[key], key)

    def test_a_posted_csv_fit_equals_the_command_line(self):
        job, result = self.fit_over_http(self.body())
        cli = self.cli_fit(self.csv_path)
        self.assert_same_fit(result, cli)
        self.assertLess(abs(result["params"]["governor.droop"] - 0.04), 0.002)  # the source grid's 0.04 (README)
        series = result["series"]
        self.assertEqual(set(series), {"t_s", "measured_mw", "initial_mw", "fitted_mw"})
        n = len(series["t_s"])
        self.assertTrue(1000 <= n <= 2000, n)
        self.assertTrue(all(len(v) == n for v in series.values()))
        first = self.csv.splitlines()[1].split(",")
        self.assertEqual(series["t_s"][0], float(first[0]))
        self.assertEqual(series["measured_mw"][0], float(first[2]))
        self.assertEqual(series["t_s"][-1], float(self.csv.splitlines()[-1].split(",")[0]))

        s, svg, r = self.srv.request("GET", f"/api/v1/fits/{job}/result?format=svg", None, TOKEN)
        self.assertEqual((s, r.getheader("Content-Type")), (200, "image/svg+xml"))
        self.assertTrue(ET.fromstring(svg).tag.endswith("svg"))
        s, fragment, _ = self.srv.request("GET", f"/api/v1/fits/{job}/result?format=fragment", None, TOKEN)
        self.assertEqual(s, 200)
        self.assertEqual(fragment, cli["fragment"])
        self.assertEqual(fragment["governor"]["droop"], result["params"]["governor.droop"])
        s, body, _ = self.srv.request("GET", f"/api/v1/fits/{job}/result?format=csv", None, TOKEN)
        self.assertEqual(s, 400, body)
        self.assertIn("format: must be json, svg or fragment", body["error"])

    def test_a_binary_comtrade_record_in_base64_fits_as_its_ascii_copy_on_the_command_line(self):
        ascii_cfg, ascii_dat, binary_cfg, binary_dat = short_comtrade()
        cfg_path = os.path.join(self.dir, "cut.cfg")
        with open(cfg_path, "w", newline="") as fh:
            fh.write(ascii_cfg)
        with open(os.path.join(self.dir, "cut.dat"), "w", newline="") as fh:
            fh.write(ascii_dat)
        _, result = self.fit_over_http(self.body(recording={
            "format": "comtrade", "cfg": binary_cfg, "dat_base64": base64.b64encode(binary_dat).decode()}))
        self.assert_same_fit(result, self.cli_fit(cfg_path))

    def test_cancel_and_one_fit_at_a_time(self):
        with open(validation("recorded_event.csv")) as fh:
            long_body = self.body(starts=32, recording={"format": "csv", "text": fh.read()})
        s, st, _ = self.srv.request("POST", "/api/v1/fits", long_body, TOKEN)
        self.assertEqual(s, 202, st)
        s, busy, _ = self.srv.request("POST", "/api/v1/fits", self.body(), TOKEN)
        self.assertEqual(s, 429, busy)
        self.assertIn("a fit is already running", busy["error"])
        s, st2, _ = self.srv.request("DELETE", f"/api/v1/fits/{st['id']}", None, TOKEN)
        self.assertEqual(s, 200, st2)
        t0 = time.time()
        done = self.wait(st["id"], timeout=30)
        self.assertEqual(done["status"], "cancelled", done)
        self.assertLess(time.time() - t0, 10)  # stopped between runs, not after 32 searches
        self.assertLess(done["done"], done["total"])
        self.assertNotIn("result", done)
        s, body, _ = self.srv.request("GET", f"/api/v1/fits/{st['id']}/result", None, TOKEN)
        self.assertEqual(s, 409, body)
        s, body, _ = self.srv.request("GET", "/api/v1/fits/999")
        self.assertEqual(s, 404, body)
        s, listed, _ = self.srv.request("GET", "/api/v1/fits")
        self.assertEqual(s, 200, listed)
        self.assertIn(st["id"], [j["id"] for j in listed["jobs"]])
        self.assertEqual(next(j for j in listed["jobs"] if j["id"] == st["id"])["status"], "cancelled")

    def test_bad_bodies_are_refused_naming_the_field(self):
        bad_csv = self.csv.replace("\n0.1,", "\n0.1,x", 1)
        table = [
            (self.body(unit="QX"), 'unit: no unit \\"QX\\" in the scenario (units: QH1, QH2)'),
            (self.body(params=["governor.droop=0.02:0.1"] * 9), "params: required, a list of 1 to 8"),
            (self.body(params=["governor.droop=0.1:0.02"]), "params[0]: governor.droop: LO (0.1) must be below HI"),
            (self.body(params=["governor.droop=0.02:0.1", "governor.lag_s=nan:1"]),
             "params[1]: \\\"governor.lag_s=nan:1\\\": LO and HI must be numbers"),
            (self.body(params=["governor.droop=0.02:0.1", "governor.lag_s=inf:1e999"]), "params[1]:"),
            (self.body(params=["governor.nothing=1:2"]), "params[0]: governor.nothing: no number"),
            (self.body(params=["governor.droop=0:0.1"]), "params[0]: governor.droop: bound 0 is outside what the model"),
            (self.body(starts=10 ** 30), "starts: must be a whole number from 1 to 32"),
            (self.body(starts=33), "starts: must be a whole number from 1 to 32"),
            (self.body(seed=-3), "seed: must be a whole number"),
            (self.body(threshold_hz="NaN"), "threshold_hz: must be a number"),
            (self.body(recording={"format": "csv", "text": bad_csv}),
             "recording.text: recording.csv line 3 column \\\"quarnholt.f_hz\\\""),
            (self.body(recording={"format": "csv", "text": self.csv}, name="plant-a.csv"), None),
            (self.body(recording={"format": "csv", "text": self.csv, "power_column": "QH9.p_mw"}),
             'recording.text: recording.csv line 1: no column \\"QH9.p_mw\\"'),
            (self.body(recording={"format": "comtrade", "cfg": "x", "dat_base64": "AAAA*AAA"}),
             "recording.dat_base64: character \\\"*\\\" at offset 4 is not base64"),
            (self.body(recording={"format": "comtrade", "cfg": "x", "dat": "1,0,1"}), "recording.cfg: recording.cfg line 1"),
            (self.body(recording={"format": "csv"}), "recording.text: required"),
            (self.body(recording=[1]), "recording: required, an object"),
            (self.body(extra=1), '\\"extra\\": unknown field'),
            ('{"unit": "QH1", "params": ' + "[" * 100 + "]" * 100 + "}", "json: "),
            ('{"unit": "QH1", "unit": "QH2"}', "json: "),
            ("[]", "body: must be a JSON object"),
        ]
        for body, fragment in table:
            with self.subTest(body=str(body)[:120]):
                s, reply, _ = self.srv.request("POST", "/api/v1/fits", body, TOKEN)
                if fragment is None:  # a good body: a job, waited for so the next is not refused 429
                    self.assertEqual(s, 202, reply)
                    self.wait(reply["id"])
                    continue
                self.assertEqual(s, 400, reply)
                self.assertIn(fragment, json.dumps(reply))
        # Over the fit's 16 MiB limit: 413 from the header, the answer read whole by http.client.
        s, reply, _ = self.srv.request("POST", "/api/v1/fits", "x" * ((16 << 20) + 1), TOKEN, timeout=30)
        self.assertEqual(s, 413, reply)
        self.assertIn("larger than 16777216 bytes", reply["error"])
        # Every other route keeps 1 MiB.
        s, reply, _ = self.srv.request("POST", "/api/v1/injections", "x" * ((1 << 20) + 1), TOKEN)
        self.assertEqual((s, reply["error"]), (413, "request body larger than 1048576 bytes"))
        # So does a fit from anyone but the instructor: a stranger cannot make the server read
        # 16 MiB only to be told 401 (or 403 with a wrong token).
        for token in (None, "not-the-token-at-all"):
            s, reply, _ = self.srv.request("POST", "/api/v1/fits", "x" * ((1 << 20) + 1), token)
            self.assertEqual((s, reply["error"]), (413, "request body larger than 1048576 bytes"))

    def test_a_viewer_gets_401(self):
        for method, path, body, why in [("POST", "/api/v1/fits", self.body(), "fits are for the instructor"),
                                        ("DELETE", "/api/v1/fits/1", None, "fits are for the instructor"),
                                        ("POST", "/api/v1/injections", {"unit": "QH1"}, "injection tests are for")]:
            s, reply, _ = self.srv.request(method, path, body)
            self.assertEqual(s, 401, reply)
            self.assertIn(why, reply["error"])

    def test_injection_tests_agree_with_the_command_line(self):
        with open(validation("injection_profile.json")) as fh:
            profile = json.load(fh)
        s, reply, _ = self.srv.request("POST", "/api/v1/injections", {"unit": "QH1", "profile": profile}, TOKEN,
                                       timeout=60)
        self.assertEqual(s, 200, reply)
        out = subprocess.run([test_server.BIN, "inject", validation("plant.json"), "--unit", "QH1", "--profile",
                              validation("injection_profile.json"), "--json"], capture_output=True, text=True,
                             timeout=120)
        self.assertIn(out.returncode, (0, 3), out.stderr)
        cli = json.loads(out.stdout)
        self.assertEqual(reply["tests"], cli["tests"])
        self.assertEqual(reply["passed"], out.returncode == 0)
        self.assertEqual(reply["passed"], all(t["passed"] for t in cli["tests"]))
        self.assertEqual((reply["unit"], reply["profile"], reply["note"]), ("QH1", profile["name"], profile["note"]))
        self.assertEqual(len(reply["plots"]), len(profile["tests"]))
        for svg in reply["plots"]:
            self.assertTrue(ET.fromstring(svg).tag.endswith("svg"))
        for body, fragment in [({"unit": "QX", "profile": profile}, 'unit: no unit \\"QX\\"'),
                               ({"unit": "QH1", "profile": {**profile, "tests": [{**profile["tests"][1], "pieces": [
                                   {"to_mhz": 200, "over_s": -2, "hold_s": 120}]}]}}, "profile.tests[0].pieces[0].over_s"),
                               ({"unit": "QH1"}, "profile: required")]:
            s, reply, _ = self.srv.request("POST", "/api/v1/injections", body, TOKEN)
            self.assertEqual(s, 400, reply)
            self.assertIn(fragment, json.dumps(reply))


class SeatTests(unittest.TestCase):
    """A seat's join code is not the instructor's token: 403 with the reason."""

    def test_a_seat_gets_403(self):
        srv = Server(os.path.join(test_server.SRC, "scenarios", "exercises", "evening_ramp.json"), option="--exercise")
        try:
            s, seats, _ = srv.request("GET", "/api/v1/seats", None, TOKEN)
            self.assertEqual(s, 200, seats)
            code = seats["seats"][0]["join_code"]
            for method, path, body, why in [("POST", "/api/v1/fits", {"unit": "x"}, "fits are for the instructor"),
                                            ("DELETE", "/api/v1/fits/1", None, "fits are for the instructor"),
                                            ("POST", "/api/v1/injections", {"unit": "x"}, "injection tests are for")]:
                s, reply, _ = srv.request(method, path, body, code)
                self.assertEqual(s, 403, reply)
                self.assertIn(why, reply["error"])
        finally:
            srv.stop()


def main():
    test_server.BIN, test_server.SRC = sys.argv[1], sys.argv[2]
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


if __name__ == "__main__":
    main()
