#!/usr/bin/python3
"""Integration tests of `droopline serve --exercise`: the hidden script (timed and conditional
firing by "script", fire now, skip, shift, add), what viewers never see, alarms raised, cleared
and acknowledged over the API and the stream, loading an exercise, and journal replay.

    /usr/bin/python3 test_exercise.py DROOPLINE_BINARY SOURCE_DIR
"""
import asyncio
import json
import os
import subprocess
import sys
import tempfile
import time
import unittest

import websockets

import test_server as ts
from test_server import TOKEN, next_of, run

EXERCISE = None
# Texts only the instructor may see before they happen: the script's notes and the command of
# every event as the journal and the script list write it, and the exercise scenario's own event.
HIDDEN = ["the east's gas unit trips", "a west customer drops load", "late help",
          '"unit":"e2"', '"mw":-10', '"over_s":77', "secret-note-7"]


def wait_for(pred, timeout=20.0, every=0.1):
    deadline = time.time() + timeout
    while time.time() < deadline:
        v = pred()
        if v:
            return v
        time.sleep(every)
    return None


class ExerciseCase(unittest.TestCase):

    @classmethod
    def setUpClass(cls):
        cls.srv = ts.Server(EXERCISE, option="--exercise", extra=["--speed", "4"])

    @classmethod
    def tearDownClass(cls):
        cls.srv.stop()

    def events(self):
        s, body, _ = self.srv.request("GET", "/api/v1/events")
        self.assertEqual(s, 200)
        return body["events"]

    def script(self):
        s, body, _ = self.srv.request("GET", "/api/v1/script", token=TOKEN)
        self.assertEqual(s, 200, body)
        return {e["id"]: e for e in body["events"]}

    def viewer_texts(self):
        """Everything a viewer can read: every viewer GET route and the WebSocket greeting."""
        out = {}
        for path in ["/api/v1/state", "/api/v1/scenario", "/api/v1/history", "/api/v1/events", "/api/v1/exercise",
                     "/api/v1/alarms", "/api/v1/role", "/healthz", "/metrics", "/api/v1/openapi.json",
                     "/api/v1/record?from_s=0&to_s=1", "/api/v1/record?from_s=0&to_s=1&part=dat", "/api/v1/sweeps/1",
                     "/api/v1/sweeps/1/result", "/"]:
            s, body, r = self.srv.request("GET", path)
            out[path] = body if isinstance(body, (bytes, bytearray)) else json.dumps(body, separators=(",", ":"))
            if isinstance(out[path], (bytes, bytearray)):
                out[path] = out[path].decode("utf-8", "replace")

        async def hello():
            async with websockets.connect(self.srv.ws_url(), max_size=2**24) as ws:
                return await asyncio.wait_for(ws.recv(), 5)
        out["greeting"] = run(hello())
        return out

    def test_1_viewers_never_see_the_script_or_the_scenario_events(self):
        # An instructor-added event with a note of its own, far ahead.
        s, body, _ = self.srv.request("POST", "/api/v1/script", {"at_s": 5000, "note": "secret-note-7",
                                      "command": {"kind": "load_step", "area": "east", "mw": 3.25}}, TOKEN)
        self.assertEqual(s, 200, body)
        for where, text in self.viewer_texts().items():
            for hidden in HIDDEN:
                with self.subTest(where=where, hidden=hidden):
                    self.assertNotIn(hidden, text)
        s, shown, _ = self.srv.request("GET", "/api/v1/scenario")
        self.assertEqual(shown["events"], [])
        s, full, _ = self.srv.request("GET", "/api/v1/scenario", token=TOKEN)
        self.assertEqual(len(full["events"]), 1)
        self.assertEqual(full["events"][0]["over_s"], 77)
        # The greeting: no events in its scenario, the active alarms listed.
        async def hello():
            async with websockets.connect(self.srv.ws_url(), max_size=2**24) as ws:
                return json.loads(await asyncio.wait_for(ws.recv(), 5))
        h = run(hello())
        self.assertEqual(h["scenario"]["events"], [])
        self.assertIsInstance(h["alarms"], list)
        # The instructor sees the whole script.
        script = self.script()
        self.assertEqual(script["s1"]["command"], {"kind": "unit_trip", "unit": "e2"})
        self.assertEqual(script["relief"]["when"]["kind"], "frequency_below")
        self.assertEqual(script["s3"]["added_by"], "instructor")
        self.assertIsNone(script["s1"]["added_by"])
        # The exercise for everyone: no script, no join codes.
        s, ex, _ = self.srv.request("GET", "/api/v1/exercise")
        self.assertEqual(s, 200)
        self.assertEqual(set(ex), {"name", "briefing", "time_limit_s", "seats", "ended"})
        self.assertEqual(ex["seats"][0], {"id": "west-desk", "name": "West desk", "areas": ["west"]})
        # The edit is in everyone's log with its author and without its content.
        edits = [e for e in self.events() if e.get("kind") == "script"]
        self.assertEqual(edits[-1]["by"], "instructor")

    def test_2_timed_and_conditional_events_fire_by_script_and_raise_alarms(self):
        async def go():
            async with websockets.connect(self.srv.ws_url(), max_size=2**24) as ws:
                await asyncio.wait_for(ws.recv(), 5)  # hello
                seen = []
                deadline = time.time() + 25
                while time.time() < deadline and not any(
                        m["type"] == "alarm" and m["alarm"]["kind"] == "unit_tripped" for m in seen):
                    m = json.loads(await asyncio.wait_for(ws.recv(), 10))
                    if m["type"] in ("alarm", "event"):
                        seen.append(m)
                trip = next(m for m in seen if m["type"] == "alarm" and m["alarm"]["kind"] == "unit_tripped")
                self.assertEqual(trip["change"], "raised")
                self.assertEqual(trip["alarm"]["severity"], "alarm")
                self.assertEqual(trip["alarm"]["areas"], ["east"])
                # A seat acknowledges the alarms of its own areas only: the west desk is refused in
                # words, the east desk's acknowledgement streams (an event alarm clears with it).
                s, seats, _ = self.srv.request("GET", "/api/v1/seats", None, TOKEN)
                code = {x["id"]: x["join_code"] for x in seats["seats"]}
                s, body, _ = self.srv.request("POST", f"/api/v1/alarms/{trip['alarm']['id']}/ack", None,
                                              code["west-desk"])
                self.assertEqual(s, 403, body)
                self.assertIn('is not about an area seat "west-desk" answers for', body["error"])
                s, body, _ = self.srv.request("POST", f"/api/v1/alarms/{trip['alarm']['id']}/ack", None,
                                              code["east-desk"])
                self.assertEqual(s, 200, body)
                self.assertEqual(body["alarm"]["acked_by"], "east-desk")
                ack = await next_of(ws, "alarm", 10)
                while ack["change"] != "acknowledged":
                    ack = await next_of(ws, "alarm", 10)
                self.assertEqual(ack["alarm"]["id"], trip["alarm"]["id"])
                self.assertFalse(ack["alarm"]["active"])
                return trip
        trip = run(go(), 60)
        s, body, _ = self.srv.request("POST", f"/api/v1/alarms/{trip['alarm']['id']}/ack", None, TOKEN)
        self.assertEqual(s, 409)
        self.assertIn("already acknowledged by east-desk", body["error"])
        s, body, _ = self.srv.request("POST", "/api/v1/alarms/99999/ack", None, TOKEN)
        self.assertEqual(s, 404)
        s, body, _ = self.srv.request("POST", "/api/v1/alarms/x1/ack", None, TOKEN)
        self.assertEqual(s, 400)
        # The trip came through the command pipeline, by "script", at its time.
        cmds = [e for e in self.events() if e.get("kind") == "command" and e.get("by") == "script"]
        self.assertTrue(any("e2" in e["text"] for e in cmds), cmds)
        self.assertAlmostEqual(next(e for e in cmds if "e2" in e["text"])["t_s"], 5.0, places=6)
        # The conditional event fires once the east has stayed below 49.9 Hz for 1 s.
        fired = wait_for(lambda: self.script()["relief"]["state"] == "fired", 30)
        self.assertTrue(fired)
        self.assertTrue(wait_for(lambda: any(e.get("by") == "script" and "west" in e["text"]
                                             for e in self.events() if e.get("kind") == "command"), 10))
        # Alarms listed: the trip (acknowledged, cleared) and level alarms with their areas.
        s, body, _ = self.srv.request("GET", "/api/v1/alarms")
        kinds = {a["kind"] for a in body["alarms"]}
        self.assertIn("unit_tripped", kinds)
        self.assertIn("frequency_band", kinds)
        s, active, _ = self.srv.request("GET", "/api/v1/alarms?active=1")
        self.assertTrue(all(a["active"] for a in active["alarms"]))
        self.assertNotIn(trip["alarm"]["id"], [a["id"] for a in active["alarms"]])
        s, body, _ = self.srv.request("GET", "/api/v1/alarms?active=yes")
        self.assertEqual(s, 400)
        # What has not happened yet stays hidden after the rest fired.
        for where, text in self.viewer_texts().items():
            for hidden in ("late help", "secret-note-7", '"over_s":77', '"enabled":true'):
                with self.subTest(where=where, hidden=hidden):
                    self.assertNotIn(hidden, text)

    def test_3_fire_skip_shift_add(self):
        s, state, _ = self.srv.request("GET", "/api/v1/state")
        now = state["t_s"]
        s, body, _ = self.srv.request("POST", "/api/v1/script", {"id": "later", "at_s": now + 4000,
                                      "command": {"kind": "load_step", "area": "east", "mw": -2}}, TOKEN)
        self.assertEqual(s, 200, body)
        self.assertEqual(body["id"], "later")
        s, body, _ = self.srv.request("POST", "/api/v1/script/later/shift", {"at_s": now + 2}, TOKEN)
        self.assertEqual(s, 200, body)
        self.assertTrue(wait_for(lambda: self.script()["later"]["state"] == "fired", 20))
        s, body, _ = self.srv.request("POST", "/api/v1/script/s2/skip", None, TOKEN)
        self.assertEqual(s, 200, body)
        self.assertEqual(self.script()["s2"]["state"], "skipped")
        s, body, _ = self.srv.request("POST", "/api/v1/script/s2/fire", None, TOKEN)
        self.assertEqual(s, 409, body)
        s, body, _ = self.srv.request("POST", "/api/v1/script/s3/fire", None, TOKEN)
        self.assertEqual(s, 200, body)
        self.assertEqual(body["by"], "script")
        self.assertEqual(body["id"], "s3")
        s, body, _ = self.srv.request("POST", "/api/v1/script/nope/skip", None, TOKEN)
        self.assertEqual(s, 404)
        self.assertEqual(body["error"], 'no script event "nope"')
        s, body, _ = self.srv.request("POST", "/api/v1/script/relief/shift", {"at_s": now + 50}, TOKEN)
        self.assertEqual(s, 409)  # fired already
        s, body, _ = self.srv.request("POST", "/api/v1/script", {"at_s": 1, "command": {"kind": "agc", "area": "east",
                                                                                         "enabled": True}}, TOKEN)
        self.assertEqual(s, 400)
        self.assertIn("at_s: must not be in the past", body["error"])
        s, body, _ = self.srv.request("POST", "/api/v1/script", {"at_s": now + 10, "when": {"kind": "tie_above",
                                      "tie": "wx", "above_pct": 50}, "command": {"kind": "agc", "area": "zz",
                                                                                 "enabled": True}}, TOKEN)
        self.assertEqual(s, 400)
        self.assertIn('needs exactly one of "at_s" (a time) and "when" (a condition)', body["issues"])
        s, body, _ = self.srv.request("POST", "/api/v1/script/later/shift", {"at_s": "soon"}, TOKEN)
        self.assertEqual(s, 400)
        texts = [e["text"] for e in self.events() if e.get("kind") == "script"]
        for verb in ("added an event", "moved a script event", "skipped a script event", "fired a script event now"):
            self.assertTrue(any(verb in t for t in texts), (verb, texts))

    def test_4_loading_an_exercise_over_http(self):
        with open(EXERCISE) as fh:
            ex = json.load(fh)
        ex["scenario"] = "elsewhere.json"
        s, body, _ = self.srv.request("PUT", "/api/v1/exercise", ex, TOKEN)
        self.assertEqual(s, 400)
        self.assertIn("scenario: must be given inline (an object) here, not as a path", body["issues"])
        with open(EXERCISE) as fh:
            ex = json.load(fh)
        ex["seats"][0]["areas"] = ["north"]
        s, body, _ = self.srv.request("PUT", "/api/v1/exercise", ex, TOKEN)
        self.assertEqual(s, 400)
        self.assertIn('seats[0].areas[0]: no area "north" in the scenario', body["issues"])
        with open(EXERCISE) as fh:
            ex = json.load(fh)
        ex["name"] = "reloaded"
        s, body, _ = self.srv.request("PUT", "/api/v1/exercise", ex, TOKEN)
        self.assertEqual(s, 200, body)
        s, body, _ = self.srv.request("GET", "/api/v1/exercise")
        self.assertEqual(body["name"], "reloaded")
        self.assertTrue(all(e["state"] == "pending" for e in self.script().values()))


class NoExerciseTests(unittest.TestCase):

    def test_without_an_exercise(self):
        srv = ts.Server(os.path.join(ts.SRC, "scenarios", "demo_three_areas.json"))
        try:
            s, body, _ = srv.request("GET", "/api/v1/exercise")
            self.assertEqual((s, body["error"]), (404, "no exercise is running"))
            s, body, _ = srv.request("GET", "/api/v1/script", token=TOKEN)
            self.assertEqual(s, 404)
            s, body, _ = srv.request("GET", "/api/v1/alarms")
            self.assertEqual((s, body), (200, {"alarms": []}))
        finally:
            srv.stop()


class ReplayTests(unittest.TestCase):

    def test_journal_replay_of_an_exercise_equals_the_live_series(self):
        srv = ts.Server(EXERCISE, option="--exercise", extra=["--speed", "5"])
        try:
            s, body, _ = srv.request("POST", "/api/v1/script/s2/shift", {"at_s": 7}, TOKEN)
            self.assertEqual(s, 200, body)
            self.assertTrue(wait_for(lambda: srv.request("GET", "/api/v1/state")[1]["t_s"] > 12, 30))
            s, body, _ = srv.request("POST", "/api/v1/control", {"action": "pause"}, TOKEN)
            self.assertEqual(s, 200)
            s, live, _ = srv.request("GET", "/api/v1/history?format=csv")
            self.assertEqual(srv.stop(), 0)
            with open(srv.journal) as fh:
                records = [json.loads(line) for line in fh if line.strip()]
            self.assertIn("script", [r["type"] for r in records])
            by_script = [r for r in records if r["type"] == "commands" and r.get("by") == "script"]
            self.assertGreaterEqual(len(by_script), 3)  # the trip, the relief, the shifted agc switch
            out = tempfile.mkdtemp()
            subprocess.run([ts.BIN, "replay", srv.journal, "--out", out, "--quiet"], check=True)
            with open(os.path.join(out, "series.csv")) as fh:
                self.assertEqual(live.decode(), fh.read())
        finally:
            srv.stop()

    def test_seats_save_points_rewinds_and_script_edits_replay_to_the_live_series(self):
        srv = ts.Server(EXERCISE, option="--exercise", extra=["--speed", "5"])
        try:
            s, seats, _ = srv.request("GET", "/api/v1/seats", None, TOKEN)
            code = {x["id"]: x["join_code"] for x in seats["seats"]}
            state = lambda: {e["id"]: e["state"] for e in srv.request("GET", "/api/v1/script", token=TOKEN)[1]["events"]}
            s, saved, _ = srv.request("POST", "/api/v1/savepoints", {"name": "before the trip"}, TOKEN)
            self.assertEqual(s, 200, saved)
            self.assertLess(saved["t_s"], 5.0)
            s, body, _ = srv.request("POST", "/api/v1/commands",
                                     {"kind": "setpoint", "unit": "w1", "mw": 210, "ramp_mw_per_s": 2},
                                     code["west-desk"])
            self.assertEqual((s, body.get("by")), (200, "west-desk"), body)
            self.assertTrue(wait_for(lambda: state()["s1"] == "fired", 30))
            # Back to the save point: the trip is to come again, the trip's alarm gone with it.
            s, body, _ = srv.request("POST", f"/api/v1/savepoints/{saved['id']}/restore", None, TOKEN)
            self.assertEqual(s, 200, body)
            self.assertEqual(state()["s1"], "pending")
            alarms = srv.request("GET", "/api/v1/alarms")[1]["alarms"]
            self.assertNotIn("unit_tripped", [a["kind"] for a in alarms])
            # A second try: the east desk acts, the instructor edits the script, the trip comes again.
            s, body, _ = srv.request("POST", "/api/v1/commands", {"kind": "agc", "area": "east", "enabled": True},
                                     code["east-desk"])
            self.assertEqual((s, body.get("by")), (200, "east-desk"), body)
            s, body, _ = srv.request("POST", "/api/v1/script/s2/shift", {"at_s": 9}, TOKEN)
            self.assertEqual(s, 200, body)
            self.assertTrue(wait_for(lambda: srv.request("GET", "/api/v1/state")[1]["t_s"] > 11, 30))
            self.assertEqual(state()["s1"], "fired")
            # A rewind to before the trip: the script goes back with it (not lost to the checkpoint).
            s, body, _ = srv.request("POST", "/api/v1/control", {"action": "rewind", "to_s": 3.0}, TOKEN)
            self.assertEqual(s, 200, body)
            self.assertEqual(state()["s1"], "pending")
            # ... with the script as edited before the rewind's target (the shift to 9 s).
            script = {e["id"]: e for e in srv.request("GET", "/api/v1/script", token=TOKEN)[1]["events"]}
            self.assertEqual(script["s2"]["at_s"], 9)
            self.assertTrue(wait_for(lambda: srv.request("GET", "/api/v1/state")[1]["t_s"] > 12, 30))
            self.assertEqual(state()["s1"], "fired")
            s, body, _ = srv.request("POST", "/api/v1/control", {"action": "pause"}, TOKEN)
            s, live, _ = srv.request("GET", "/api/v1/history?format=csv")
            self.assertEqual(srv.stop(), 0)
            with open(srv.journal) as fh:
                records = [json.loads(line) for line in fh if line.strip()]
            self.assertEqual([r["type"] for r in records if r["type"] in ("savepoint", "restore", "rewind")],
                             ["savepoint", "restore", "rewind"])
            self.assertEqual({r.get("by") for r in records if r["type"] == "commands"},
                             {"west-desk", "east-desk", "script"})
            out = tempfile.mkdtemp()
            subprocess.run([ts.BIN, "replay", srv.journal, "--out", out, "--quiet", "--final-lineage"], check=True)
            with open(os.path.join(out, "series.csv")) as fh:
                self.assertEqual(live.decode(), fh.read())
        finally:
            srv.stop()


def main():
    ts.BIN, ts.SRC = sys.argv[1], sys.argv[2]
    global EXERCISE
    EXERCISE = os.path.join(ts.SRC, "tests", "data", "exercise_two_areas.json")
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


if __name__ == "__main__":
    main()
