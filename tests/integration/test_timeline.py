#!/usr/bin/python3
"""Save points and rewind against the real server: save, act, restore, the same commands again and
the history after is the first branch bit for bit; a rewind goes back within the last 600 s and
no further; `droopline replay` of the journal gives the rows of every branch as they were
streamed, and with --final-lineage the history the session ended with. Bounded in count and time.
    /usr/bin/python3 test_timeline.py DROOPLINE_BINARY SOURCE_DIR
"""
import os
import subprocess
import sys
import tempfile
import time
import unittest

import test_server
from test_server import TOKEN, Server


def rows_of(csv_bytes):
    """(header, [(t_s, line), ...]) of a history or series CSV."""
    lines = csv_bytes.decode().strip().split("\n")
    return lines[0], [(float(line.split(",", 1)[0]), line) for line in lines[1:]]


class TimelineTests(unittest.TestCase):

    def setUp(self):
        self.srv = Server(os.path.join(test_server.SRC, "scenarios", "demo_three_areas.json"), extra=["--speed", "10"])
        self.streamed = []  # the rows as the session streamed them, branch after branch
        self.branch_from = -1.0  # the time the present branch went on from

    def tearDown(self):
        self.srv.stop()

    def call(self, method, path, body=None, status=200, token=TOKEN):
        s, reply, _ = self.srv.request(method, path, body, token)
        self.assertEqual(s, status, reply)
        return reply

    def control(self, action, **extra):
        return self.call("POST", "/api/v1/control", {"action": action, **extra})

    def now(self):
        return self.call("GET", "/api/v1/state")["t_s"]

    def run_past(self, t_s):
        """Runs until the session's time passes t_s (bounded), then pauses; the time it paused at."""
        self.control("resume")
        deadline = time.time() + 60
        while self.now() <= t_s:
            self.assertLess(time.time(), deadline, "the session did not get there")
            time.sleep(0.05)
        return self.control("pause")["t_s"]

    def history(self, from_s=0.0, to_s=1e9):
        s, body, _ = self.srv.request("GET", f"/api/v1/history?format=csv&from_s={from_s!r}&to_s={to_s!r}")
        self.assertEqual(s, 200)
        return body

    def branch_ends(self):
        """Records the rows the present branch streamed (paused, so none comes after)."""
        _, rows = rows_of(self.history())
        self.streamed += [r for r in rows if r[0] > self.branch_from]

    def go_back(self, path, body=None):
        """A restore or rewind, after recording the branch it leaves."""
        self.branch_ends()
        reply = self.call("POST", path, body)
        self.branch_from = reply["t_s"]
        return reply

    def replay_checked(self, final):
        """Stops the server; its journal must replay every branch as streamed and, with
        --final-lineage, the history `final` it ended with. The replayed rows."""
        self.assertEqual(self.srv.stop(), 0)
        out, out_final = tempfile.mkdtemp(), tempfile.mkdtemp()
        subprocess.run([test_server.BIN, "replay", self.srv.journal, "--out", out, "--quiet"], check=True, timeout=120)
        subprocess.run([test_server.BIN, "replay", self.srv.journal, "--out", out_final, "--quiet", "--final-lineage"],
                       check=True, timeout=120)
        with open(os.path.join(out, "series.csv"), "rb") as fh:
            header, replayed = rows_of(fh.read())
        self.assertEqual(header, rows_of(final)[0])
        self.assertEqual([line for _, line in replayed], [line for _, line in self.streamed])
        with open(os.path.join(out_final, "series.csv"), "rb") as fh:
            self.assertEqual(fh.read(), final)
        return replayed

    def load_step(self, mw):
        reply = self.call("POST", "/api/v1/commands", {"kind": "load_step", "area": "oskany", "mw": mw})
        self.assertEqual(reply["by"], "instructor")

    def test_restore_then_the_same_commands_rewind_and_replay_of_every_branch(self):
        t0 = self.run_past(2.0)
        saved = self.call("POST", "/api/v1/savepoints", {"name": "before the step"})
        self.assertEqual((saved["name"], saved["t_s"]), ("before the step", t0))
        self.load_step(40)  # paused: applied at the step it was sent at, on each branch alike
        t1 = self.run_past(t0 + 6.0)
        first = self.history(t0, t1)
        self.assertGreater(len(first.split(b"\n")), 50)

        # Another branch, then back to the save point.
        self.load_step(-70)
        self.run_past(t1 + 1.0)
        restored = self.go_back(f"/api/v1/savepoints/{saved['id']}/restore")
        self.assertEqual(restored["t_s"], t0)
        self.assertEqual(restored["savepoint"], {"id": saved["id"], "name": "before the step"})
        _, rows = rows_of(self.history())
        self.assertLessEqual(rows[-1][0], t0)  # the history shows the restored lineage
        events = self.call("GET", "/api/v1/events")["events"]
        back = [e for e in events if e["type"] == "restored"]
        self.assertEqual(len(back), 1)
        self.assertEqual((back[0]["by"], back[0]["t_s"], back[0]["savepoint"]["id"]), ("instructor", t0, saved["id"]))
        # The log is the save point's: its own entry kept, the commands sent after it gone with them.
        self.assertTrue(any(e.get("kind") == "savepoint" for e in events))
        self.assertFalse(any(e.get("kind") == "command" for e in events), events)

        # The same command again: the same rows, bit for bit.
        self.load_step(40)
        self.run_past(t1)
        self.assertEqual(self.history(t0, t1), first)

        # A rewind to between the two, then on: the same rows again.
        rewound = self.go_back("/api/v1/control", {"action": "rewind", "to_s": t0 + 2.5})
        self.assertIsNone(rewound["savepoint"])
        _, rows = rows_of(self.history())
        self.assertLessEqual(rows[-1][0], t0 + 2.5 + 1e-9)
        self.run_past(t1)
        self.assertEqual(self.history(t0, t1), first)

        # A rewind on a new branch (another command after it), so the final lineage differs.
        self.go_back("/api/v1/control", {"action": "rewind", "to_s": t1 - 1.0})
        self.load_step(25)
        self.run_past(t1 + 2.0)
        final = self.history()
        self.branch_ends()

        # Out of reach, malformed, unknown: refused in words, nothing changes.
        now = self.now()
        ahead = self.call("POST", "/api/v1/control", {"action": "rewind", "to_s": now + 5}, status=400)
        self.assertIn("to_s: must lie within the last 600 s of this lineage and not ahead of now", ahead["error"])
        self.call("POST", "/api/v1/control", {"action": "rewind", "to_s": -1}, status=400)
        missing = self.call("POST", "/api/v1/control", {"action": "rewind"}, status=400)
        self.assertIn("to_s: required", missing["error"])
        self.call("POST", "/api/v1/control", {"action": "rewind", "to_s": "1"}, status=400)
        self.call("POST", "/api/v1/savepoints/999/restore", status=404)
        self.call("POST", "/api/v1/savepoints/abc/restore", status=404)
        self.call("POST", "/api/v1/savepoints", {"name": 5}, status=400)
        self.call("POST", "/api/v1/savepoints", {"name": "x", "extra": 1}, status=400)
        self.call("GET", "/api/v1/savepoints", status=401, token=None)
        self.assertEqual(self.now(), now)
        listed = self.call("GET", "/api/v1/savepoints")
        self.assertEqual([(p["id"], p["name"]) for p in listed["savepoints"]], [(saved["id"], "before the step")])
        self.assertEqual(self.history(), final)

        # The journal replays every branch as it was streamed, and the final lineage on request.
        replayed = self.replay_checked(final)
        self.assertEqual(sum(1 for a, b in zip(replayed, replayed[1:]) if b[0] < a[0]), 3)  # time went back 3 times

    def test_a_save_point_on_a_course_since_rewound_past_is_restored_and_replayed(self):
        # Saved at t_a, rewound to before it, then the save point restored: forward in time, onto a
        # course the rewind left. Then again from a later time on a new course.
        t0 = self.run_past(1.0)
        self.load_step(30)
        t_a = self.run_past(t0 + 3.0)
        saved = self.call("POST", "/api/v1/savepoints", {"name": "after the step"})
        first_course = self.history(0.0, t_a)
        self.run_past(t_a + 1.0)
        self.go_back("/api/v1/control", {"action": "rewind", "to_s": t0 - 0.5})
        restored = self.go_back(f"/api/v1/savepoints/{saved['id']}/restore")
        self.assertEqual(restored["t_s"], t_a)
        self.run_past(t_a + 1.0)
        self.go_back("/api/v1/control", {"action": "rewind", "to_s": t0 - 0.5})
        self.load_step(-20)  # a new course, past the save point's time
        self.run_past(t_a + 2.0)
        self.go_back(f"/api/v1/savepoints/{saved['id']}/restore")
        self.run_past(t_a + 1.5)
        final = self.history()
        self.assertEqual(self.history(0.0, t_a), first_course)  # the save point's course, not the last one
        # So is the event log: the first course's load step, none of the last course's, nothing of
        # either after the save point but the restores.
        events = self.call("GET", "/api/v1/events")["events"]
        commands = [e["text"] for e in events if e.get("kind") == "command"]
        self.assertEqual(len(commands), 1, commands)
        self.assertIn("30", commands[0])
        later = [e for e in events if e.get("t_s", e.get("at_s", 0)) > t_a + 1e-9 and e["type"] != "restored"
                 and e.get("kind") not in ("pause", "resume")]  # the last run_past's own
        self.assertEqual(later, [])
        self.branch_ends()
        s, debrief, _ = self.srv.request("GET", "/api/v1/debrief", None, TOKEN)
        self.assertEqual(s, 200, debrief)
        self.replay_checked(final)

    def test_a_save_point_name_is_cut_and_a_run_keeps_fifty(self):
        first = self.call("POST", "/api/v1/savepoints", {"name": "é" * 40})  # 80 bytes of UTF-8
        self.assertEqual(first["name"], "é" * 32)
        self.assertEqual(self.call("POST", "/api/v1/savepoints", {})["name"], "save point 2")
        for _ in range(48):
            self.call("POST", "/api/v1/savepoints", {"name": "p"})
        full = self.call("POST", "/api/v1/savepoints", {"name": "one too many"}, status=409)
        self.assertIn("50 save points", full["error"])
        # A reset starts a new run without them.
        self.control("reset")
        self.assertEqual(self.call("GET", "/api/v1/savepoints")["savepoints"], [])
        self.call("POST", f"/api/v1/savepoints/{first['id']}/restore", status=404)


def main():
    test_server.BIN, test_server.SRC = sys.argv[1], sys.argv[2]
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


if __name__ == "__main__":
    main()
