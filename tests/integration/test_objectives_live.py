#!/usr/bin/python3
"""Integration tests of an exercise's objectives on the live server: who sees which scores, trainee
names (HTTP and the WebSocket auth message), the instructor's notes, acknowledgements journalled
before they take effect, the time limit and the instructor's end, a rewind bringing the objective
state back, and hostile input to the new routes.

    /usr/bin/python3 test_objectives_live.py DROOPLINE_BINARY SOURCE_DIR
"""
import asyncio
import json
import os
import tempfile
import time
import unittest

import websockets

import test_exercise as te
import test_server as ts
from test_exercise import wait_for
from test_server import TOKEN, run


def exercise_file(**changes):
    """The test exercise with objectives for both seats (and `changes`), written to a temporary file."""
    with open(te.EXERCISE) as fh:
        ex = json.load(fh)
    ex["objectives"] = [
        {"id": "dev", "measure": "largest_deviation_hz", "target": 0.05},
        {"id": "band", "measure": "time_outside_standard_s", "target": 5, "weight": 2},
        {"id": "ack", "seat": "east-desk", "measure": "alarm_to_ack_s", "target": 10},
    ]
    ex.update(changes)
    path = os.path.join(tempfile.mkdtemp(prefix="droopline-obj-"), "exercise.json")
    with open(path, "w") as fh:
        json.dump(ex, fh)
    return path


def journal(srv):
    with open(srv.journal) as fh:
        return [json.loads(line) for line in fh if line.strip()]


class LiveCase(unittest.TestCase):
    speed = "4"
    changes = {}

    @classmethod
    def setUpClass(cls):
        cls.srv = ts.Server(exercise_file(**cls.changes), option="--exercise", extra=["--speed", cls.speed])
        s, body, _ = cls.srv.request("GET", "/api/v1/seats", token=TOKEN)
        assert s == 200, body
        cls.codes = {seat["id"]: seat["join_code"] for seat in body["seats"]}

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()

    def call(self, method, path, body=None, status=200, token=TOKEN):
        s, reply, _ = self.srv.request(method, path, body, token)
        self.assertEqual(s, status, reply)
        return reply

    def now(self):
        return self.call("GET", "/api/v1/state", token=None)["t_s"]

    def run_past(self, t_s):
        """Runs until the session's time passes t_s (bounded), then pauses; the time it paused at."""
        self.call("POST", "/api/v1/control", {"action": "resume"})
        self.assertTrue(wait_for(lambda: self.now() > t_s, 60), "the session did not get there")
        return self.call("POST", "/api/v1/control", {"action": "pause"})["t_s"]


class ObjectivesLive(LiveCase):

    def test_1_who_sees_which_scores(self):
        east = self.call("GET", "/api/v1/objectives", token=self.codes["east-desk"])
        self.assertEqual([s["seat"] for s in east["seats"]], ["east-desk"])
        self.assertEqual(sorted(o["objective"] for o in east["seats"][0]["objectives"]), ["ack", "band", "dev"])
        west = self.call("GET", "/api/v1/objectives", token=self.codes["west-desk"])
        self.assertEqual([s["seat"] for s in west["seats"]], ["west-desk"])
        self.assertNotIn("ack", [o["objective"] for o in west["seats"][0]["objectives"]])  # the east's own
        every = self.call("GET", "/api/v1/objectives")
        self.assertEqual([s["seat"] for s in every["seats"]], ["west-desk", "east-desk"])
        self.assertFalse(every["ended"])
        s, body, _ = self.srv.request("GET", "/api/v1/objectives")
        self.assertEqual(s, 401, body)
        self.assertIn("a seat sees its own objectives", body["error"])

    def test_2_names_over_http_and_websocket(self):
        reply = self.call("POST", "/api/v1/seats/join", {"name": "  Tamsin Orrey \t"}, token=self.codes["west-desk"])
        self.assertEqual((reply["seat"], reply["name"]), ("west-desk", "Tamsin Orrey"))

        async def auth(message):
            async with websockets.connect(self.srv.ws_url(), max_size=2**24) as ws:
                await ws.send(json.dumps({"type": "auth", "id": 1, **message}))
                deadline = time.time() + 10
                while time.time() < deadline:
                    m = json.loads(await asyncio.wait_for(ws.recv(), 10))
                    if m["type"] == "auth":
                        return m
        answer = run(auth({"token": self.codes["east-desk"], "name": "Bram Yelland"}))
        self.assertTrue(answer["ok"], answer)
        self.assertEqual(answer["trainee"], "Bram Yelland")
        refused = run(auth({"token": self.codes["east-desk"], "name": "bad\u0007bell"}))
        self.assertFalse(refused["ok"])
        self.assertIn("name: control character", refused["error"])
        refused = run(auth({"token": TOKEN, "name": "Instructor Person"}))
        self.assertFalse(refused["ok"])
        self.assertIn("only a seat's trainee gives a name", refused["error"])

        seats = {s["id"]: s for s in self.call("GET", "/api/v1/seats")["seats"]}
        self.assertEqual((seats["west-desk"]["trainee"], seats["east-desk"]["trainee"]), ("Tamsin Orrey", "Bram Yelland"))
        self.assertTrue(wait_for(lambda: {("west-desk", "Tamsin Orrey"), ("east-desk", "Bram Yelland")} <= {
            (r["seat"], r["name"]) for r in journal(self.srv) if r["type"] == "trainee"}, 10))
        # A name is the instructor's to read: not in any viewer's or seat's view of the exercise.
        for token in (None, self.codes["west-desk"]):
            s, body, _ = self.srv.request("GET", "/api/v1/exercise", token=token)
            self.assertEqual(s, 200)
            self.assertNotIn("Tamsin", json.dumps(body))

    def test_3_notes_are_the_instructors(self):
        reply = self.call("POST", "/api/v1/notes", {"text": "west slow on the\nsecondary control"})
        self.assertEqual(reply["id"], 1)
        notes = self.call("GET", "/api/v1/notes")["notes"]
        self.assertEqual([n["text"] for n in notes], ["west slow on the\nsecondary control"])
        self.assertEqual(notes[0]["by"], "instructor")
        for token in (None, self.codes["west-desk"]):
            s, body, _ = self.srv.request("GET", "/api/v1/notes", token=token)
            self.assertIn(s, (401, 403), body)
            s, body, _ = self.srv.request("POST", "/api/v1/notes", {"text": "x"}, token=token)
            self.assertIn(s, (401, 403), body)
        self.assertFalse(any("secondary control" in json.dumps(e) for e in self.call("GET", "/api/v1/events")["events"]))
        self.assertTrue(wait_for(lambda: [r for r in journal(self.srv) if r["type"] == "note"], 10))
        note = [r for r in journal(self.srv) if r["type"] == "note"][0]
        self.assertEqual((note["by"], note["text"]), ("instructor", "west slow on the\nsecondary control"))

    def test_4_ack_is_journalled_before_it_takes_effect(self):
        # The trip at 5 s raises alarms in the east.
        self.run_past(6.0)
        alarms = self.call("GET", "/api/v1/alarms?active=1", token=None)["alarms"]
        east = [a for a in alarms if "east" in a["areas"] and a["acked_by"] is None]
        self.assertTrue(east, alarms)
        self.call("POST", "/api/v1/control", {"action": "resume"})
        reply = self.call("POST", f"/api/v1/alarms/{east[0]['id']}/ack", token=self.codes["east-desk"])
        self.assertEqual(reply["alarm"]["acked_by"], "east-desk")
        acks = [r for r in journal(self.srv) if r["type"] == "ack"]
        self.assertEqual([(r["alarm"], r["by"]) for r in acks], [(east[0]["id"], "east-desk")])
        self.assertIsInstance(acks[0]["step"], int)
        # Its response time counts in the east's objective now.
        ack = [o for o in self.call("GET", "/api/v1/objectives", token=self.codes["east-desk"])["seats"][0]["objectives"]
               if o["objective"] == "ack"][0]
        self.assertIsNotNone(ack["measured"])
        self.call("POST", "/api/v1/control", {"action": "pause"})

    def test_5_a_rewind_brings_the_objectives_back(self):
        t1 = self.run_past(self.now() + 1.0)
        at_t1 = self.call("GET", "/api/v1/objectives")
        self.call("POST", "/api/v1/commands", {"kind": "load_step", "area": "west", "mw": 60})
        t2 = self.run_past(t1 + 6.0)
        later = self.call("GET", "/api/v1/objectives")
        self.assertNotEqual(later["seats"], at_t1["seats"])  # the step moved the measures on
        back = self.call("POST", "/api/v1/control", {"action": "rewind", "to_s": t1})
        self.assertEqual(back["t_s"], t1)
        again = self.call("GET", "/api/v1/objectives")
        self.assertEqual(again["t_s"], at_t1["t_s"])
        self.assertEqual(again["seats"], at_t1["seats"])
        self.assertLess(t1, t2)

    def test_6_hostile_input(self):
        west = self.codes["west-desk"]
        cases = [
            ("/api/v1/seats/join", west, {"name": "x" * 300}, "name: at most 240 bytes, got 300"),
            ("/api/v1/seats/join", west, {"name": "   "}, "name: required, at least one character"),
            ("/api/v1/seats/join", west, {"name": "a\nb"}, "name: control character (code 10) at byte 1"),
            ("/api/v1/seats/join", west, {"name": 5}, "name: required, a string"),
            ("/api/v1/seats/join", west, {"name": "a", "x": 1}, '"x": unknown field'),
            ("/api/v1/seats/join", west, ["name"], 'body must be {"name": "..."}'),
            ("/api/v1/seats/join", west, "[" * 5000 + "]" * 5000, "nested"),
            ("/api/v1/seats/join", west, {"name": "y" * 500000}, "name: at most 240 bytes, got 500000"),
            ("/api/v1/notes", TOKEN, {"text": "z" * 4001}, "text: at most 4000 bytes, got 4001"),
            ("/api/v1/notes", TOKEN, {"text": "esc\u001b[2J"}, "text: control character (code 27) at byte 3"),
            ("/api/v1/notes", TOKEN, {"text": None}, "text: required, a string"),
            ("/api/v1/notes", TOKEN, "{\"text\": ", ""),
        ]
        for path, token, body, fragment in cases:
            s, reply, _ = self.srv.request("POST", path, body, token)
            self.assertEqual(s, 400, (path, str(body)[:80], reply))
            self.assertIn(fragment, reply["error"], (path, str(body)[:80]))
            self.assertLess(len(reply["error"]), 600)  # never the input echoed back whole
        # A long name is cut at a character's start, never inside one: 59 ASCII bytes then a 2-byte letter.
        reply = self.call("POST", "/api/v1/seats/join", {"name": "n" * 59 + "\u00e9" * 10}, token=west)
        self.assertEqual(reply["name"], "n" * 59)
        reply = self.call("POST", "/api/v1/seats/join", {"name": "Tamsin Orrey"}, token=west)
        # A desk has a few trainees in a run, not hundreds (each name goes into the records): past
        # eight names a new one is refused; one already given is still taken.
        refused = None
        for i in range(10):
            s, reply, _ = self.srv.request("POST", "/api/v1/seats/join", {"name": f"Trainee {i}"}, west)
            if s != 200:
                refused = (i, s, reply["error"])
                break
        self.assertIsNotNone(refused)
        self.assertEqual(refused[1], 409)
        self.assertIn('seat "west-desk" has had 8 trainees in this run', refused[2])
        reply = self.call("POST", "/api/v1/seats/join", {"name": "Tamsin Orrey"}, token=west)
        # The instructor has no seat to name.
        s, reply, _ = self.srv.request("POST", "/api/v1/seats/join", {"name": "a"}, TOKEN)
        self.assertEqual(s, 403, reply)
        s, reply, _ = self.srv.request("POST", "/api/v1/control", {"action": "ending"}, TOKEN)
        self.assertEqual(s, 400)
        self.assertIn('"end"', reply["error"])

    def test_7_the_instructor_ends_it(self):
        seat = self.codes["west-desk"]
        self.call("POST", "/api/v1/control", {"action": "resume"})
        reply = self.call("POST", "/api/v1/control", {"action": "end"})
        self.assertEqual((reply["complete"], reply["why"]), (True, "ended by the instructor"))
        setpoint = {"kind": "setpoint", "unit": "w1", "mw": 210, "ramp_mw_per_s": 2}
        s, body, _ = self.srv.request("POST", "/api/v1/commands", setpoint, seat)
        self.assertEqual(s, 409, body)
        self.assertIn("the exercise has ended", body["error"])
        self.call("POST", "/api/v1/control", {"action": "end"}, status=409)
        self.call("POST", "/api/v1/control", {"action": "resume"}, status=409)
        self.assertTrue(self.call("GET", "/api/v1/exercise", token=None)["ended"])
        self.assertTrue(self.call("GET", "/api/v1/objectives")["ended"])
        events = self.call("GET", "/api/v1/events", token=None)["events"]
        self.assertEqual([e["why"] for e in events if e["type"] == "exercise_end"], ["ended by the instructor"])
        # A reset starts a new run: commands go through again.
        self.call("POST", "/api/v1/control", {"action": "reset"})
        self.call("POST", "/api/v1/commands", setpoint, token=seat)
        self.assertFalse(self.call("GET", "/api/v1/exercise", token=None)["ended"])
        records = journal(self.srv)
        runs = [r["run"] for r in records if r["type"] == "scenario"]
        self.assertEqual(len(runs), 2)
        self.assertNotEqual(runs[0], runs[1])
        self.assertTrue(all(len(r) == 32 and int(r, 16) >= 0 for r in runs))
        self.assertEqual([r["type"] for r in records[:2]], ["scenario", "exercise"])
        self.assertEqual(records[1]["run"], runs[0])
        self.assertEqual(records[1]["exercise"]["name"], "Test exercise: two areas, a trip in the east")
        ends = [(r["complete"], r["why"]) for r in records if r["type"] == "end"]
        self.assertEqual(ends, [(True, "ended by the instructor")])
        # The trainees stay at their seats across the reset: named again in the new run.
        second = records[[i for i, r in enumerate(records) if r["type"] == "scenario"][1]:]
        self.assertIn(("west-desk", "Tamsin Orrey"), [(r["seat"], r["name"]) for r in second if r["type"] == "trainee"])


class TimeLimit(LiveCase):
    speed = "20"
    changes = {"time_limit_s": 12}

    def test_the_time_limit_ends_the_exercise(self):
        seat = self.codes["east-desk"]
        self.assertTrue(wait_for(lambda: self.call("GET", "/api/v1/exercise", token=None)["ended"], 30))
        t = self.now()
        self.assertGreaterEqual(t, 12.0)
        self.assertLess(t, 12.5)
        time.sleep(0.3)
        self.assertEqual(self.now(), t)  # paused there
        s, body, _ = self.srv.request("POST", "/api/v1/commands", {"kind": "load_step", "area": "east", "mw": 1}, seat)
        self.assertEqual(s, 409, body)
        self.assertIn("the exercise has ended", body["error"])
        events = self.call("GET", "/api/v1/events", token=None)["events"]
        self.assertEqual([e["why"] for e in events if e["type"] == "exercise_end"], ["time limit reached"])
        self.assertEqual(self.srv.stop(), 0)
        records = journal(self.srv)
        self.assertEqual([(r["complete"], r["why"]) for r in records if r["type"] == "end"],
                         [(True, "time limit reached")])
        self.assertEqual(records[-1]["type"], "stop")


class StopEndsTheRun(LiveCase):

    def test_a_run_cut_short_is_marked_incomplete(self):
        with open(te.EXERCISE) as fh:
            self.call("PUT", "/api/v1/scenario", json.load(fh)["scenario"])
        self.assertEqual(self.srv.stop(), 0)
        records = journal(self.srv)
        self.assertEqual([(r["complete"], r["why"]) for r in records if r["type"] == "end"],
                         [(False, "another scenario was loaded"), (False, "the service stopped")])
        self.assertEqual([r["type"] for r in records], ["scenario", "exercise", "end", "scenario", "end", "stop"])


if __name__ == "__main__":
    te.main()  # the same arguments and exercise (tests/data/exercise_two_areas.json); runs this file's tests
