#!/usr/bin/python3
"""The training records on the real server, read back with Python's own sqlite3 module: SIGKILL
mid-exercise and a restart (the file intact, the run incomplete, every acknowledged action kept,
the run listed by the records routes), a full disk and a read-only folder (a clear message, the
session goes on).

    /usr/bin/python3 test_records.py DROOPLINE_BINARY SOURCE_DIR
"""
import os
import resource
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time
import unittest

import test_server as ts
from test_server import TOKEN
from test_exercise import wait_for

EXERCISE = None


class Server(ts.Server):
    """`droopline serve` with its log kept in a file, optionally changed before exec (limits, user)."""

    def __init__(self, args, preexec=None, workdir=None):
        self.dir = workdir or tempfile.mkdtemp(prefix="droopline-rec-")
        self.port = ts.free_port()
        token_file = os.path.join(self.dir, "token")
        with open(token_file, "w") as fh:
            fh.write(TOKEN + "\n")
        os.chmod(token_file, 0o644)
        self.log = os.path.join(tempfile.mkdtemp(prefix="droopline-rec-log-"), "server.log")
        self.log_fh = open(self.log, "w")
        os.chmod(os.path.dirname(self.log), 0o777)
        self.proc = subprocess.Popen(
            [ts.BIN, "serve", *args, "--listen", f"127.0.0.1:{self.port}", "--token-file", token_file,
             "--log-level", "info"], stdout=self.log_fh, stderr=subprocess.STDOUT, text=True, preexec_fn=preexec)
        if not wait_for(lambda: "listening on" in self.text() or self.proc.poll() is not None, 10):
            raise RuntimeError("server did not start: " + self.text())
        if self.proc.poll() is not None:
            raise RuntimeError("server exited: " + self.text())

    def stop(self):
        code = super().stop()
        self.log_fh.close()
        return code

    def text(self):
        with open(self.log) as fh:
            return fh.read()

    def call(self, method, path, body=None, token=TOKEN):
        s, reply, _ = self.request(method, path, body, token)
        return s, reply


def seat_command(srv):
    """A seat's code and a setpoint command on one of its own online units."""
    _, seats = srv.call("GET", "/api/v1/seats")
    seat = seats["seats"][0]
    _, scenario = srv.call("GET", "/api/v1/scenario")
    own = [u for u in scenario["units"] if u["area"] in seat["areas"] and u.get("online", True)
           and u.get("setpoint_mw", 0) > 20]
    return seat, own[0]


class RecordsCase(unittest.TestCase):

    def test_sigkill_mid_exercise_then_restart(self):
        work = tempfile.mkdtemp(prefix="droopline-rec-")
        journal, records = os.path.join(work, "journal.jsonl"), os.path.join(work, "records.sqlite3")
        args = ["--exercise", EXERCISE, "--journal", journal, "--records", records, "--speed", "4"]
        srv = Server(args, workdir=work)
        try:
            seat, unit = seat_command(srv)
            s, joined = srv.call("POST", "/api/v1/seats/join", {"name": "Ilse Marrow"}, seat["join_code"])
            self.assertEqual(s, 200, joined)
            acknowledged = []
            for k in range(4):
                mw = round(unit["setpoint_mw"] - 3 - k, 1)
                s, reply = srv.call("POST", "/api/v1/commands", {"kind": "setpoint", "unit": unit["id"], "mw": mw},
                                    seat["join_code"])
                self.assertEqual(s, 200, reply)
                acknowledged.append(mw)
            _, state = srv.call("GET", "/api/v1/state")
        finally:
            srv.proc.kill()  # SIGKILL: no end record, no last write
            srv.stop()
        srv2 = Server(args, workdir=work)
        try:
            s, runs = srv2.call("GET", "/api/v1/records/runs?trainee=Ilse%20Marrow")
            self.assertEqual(s, 200, runs)
            self.assertEqual(len(runs["runs"]), 1, runs)
            old = runs["runs"][0]
            self.assertEqual(old["status"], "incomplete")
            self.assertIn("Ilse Marrow", old["seats"][0]["trainees"])
            s, all_runs = srv2.call("GET", "/api/v1/records/runs")
            self.assertEqual([r["status"] for r in all_runs["runs"]], ["running", "incomplete"])
            s, status = srv2.call("GET", "/api/v1/records/status")
            self.assertEqual(status, {"file": records, "ok": True, "error": None})
        finally:
            srv2.stop()
        db = sqlite3.connect(records)
        try:
            self.assertEqual(db.execute("PRAGMA integrity_check").fetchone()[0], "ok")
            row = db.execute("SELECT status, why FROM runs WHERE run_id = ?", (old["run_id"],)).fetchone()
            self.assertEqual(row, ("incomplete", "the service stopped without ending it"))
            kept = [c for (c,) in db.execute("SELECT commands FROM actions WHERE run_id = ? AND by = ?",
                                             (old["run_id"], seat["id"]))]
            for mw in acknowledged:
                self.assertTrue(any(f'"mw":{mw}' in c or f'"mw":{mw:g}' in c for c in kept), (mw, kept))
        finally:
            db.close()

    def assert_session_goes_on(self, srv, code):
        t0 = srv.call("GET", "/api/v1/state")[1]["t_s"]
        for k in range(3):
            s, reply = srv.call("POST", "/api/v1/commands", {"kind": "load_step", "area": "oskany", "mw": 0.5 + k})
            self.assertEqual(s, 200, reply)
        self.assertTrue(wait_for(lambda: srv.call("GET", "/api/v1/state")[1]["t_s"] > t0 + 1, 10))
        s, status = srv.call("GET", "/api/v1/records/status")
        self.assertEqual(s, 200)
        return status

    def test_a_full_disk(self):
        work = tempfile.mkdtemp(prefix="droopline-rec-")
        records = os.path.join(work, "records.sqlite3")

        def small_files():
            # Writes past 160 kB fail with EFBIG (SIGXFSZ ignored): the WAL, a few pages per
            # transaction, reaches that long before the journal's short lines do.
            signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
            resource.setrlimit(resource.RLIMIT_FSIZE, (160_000, 160_000))

        srv = Server(["--scenario", os.path.join(ts.SRC, "scenarios", "demo_three_areas.json"), "--journal",
                      os.path.join(work, "journal.jsonl"), "--records", records, "--speed", "4"], preexec=small_files,
                     workdir=work)
        try:
            for k in range(60):
                s, reply = srv.call("POST", "/api/v1/commands", {"kind": "load_step", "area": "oskany", "mw": 0.25})
                self.assertEqual(s, 200, reply)
            self.assertTrue(wait_for(lambda: not srv.call("GET", "/api/v1/records/status")[1]["ok"], 15), srv.text())
            status = self.assert_session_goes_on(srv, 200)
            self.assertFalse(status["ok"])
            self.assertIn(f"records: cannot write {records}: ", status["error"])
            self.assertIn("; the session goes on without records", status["error"])
            self.assertEqual(srv.text().count("records: cannot write"), 1, srv.text())  # said once
        finally:
            srv.stop()

    def test_a_read_only_folder(self):
        work = tempfile.mkdtemp(prefix="droopline-rec-")
        folder = os.path.join(work, "kept")
        os.mkdir(folder)
        records = os.path.join(folder, "records.sqlite3")
        preexec = None
        if os.geteuid() == 0:
            # root writes anywhere: run the server as nobody, who may read the folder but not write it.
            os.chmod(work, 0o777)
            os.chmod(folder, 0o555)

            def preexec():
                os.setgid(65534)
                os.setuid(65534)
        else:
            os.chmod(folder, 0o555)
        srv = Server(["--scenario", os.path.join(ts.SRC, "scenarios", "demo_three_areas.json"), "--journal",
                      os.path.join(work, "journal.jsonl"), "--records", records], preexec=preexec, workdir=work)
        try:
            status = self.assert_session_goes_on(srv, 200)
            self.assertFalse(status["ok"])
            self.assertIn(f"records: cannot write {records}: unable to open database file", status["error"])
            self.assertIn(f"records: cannot write {records}", srv.text())
            s, reply = srv.call("GET", "/api/v1/records/runs")
            self.assertEqual(s, 503, reply)
        finally:
            srv.stop()
            os.chmod(folder, 0o755)


if __name__ == "__main__":
    ts.BIN, ts.SRC = sys.argv[1], sys.argv[2]
    EXERCISE = os.path.join(ts.SRC, "scenarios", "exercises", "peak_unit_loss.json")
    unittest.main(argv=sys.argv[:1], verbosity=2)
