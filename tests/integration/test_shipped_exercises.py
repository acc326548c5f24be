#!/usr/bin/python3
"""The shipped exercises (scenarios/exercises/) as a training session runs them: each loads in
`droopline serve --exercise`, each seat signs in with its join code (HTTP and WebSocket), may act on
its own areas (start its reserve unit, change a setpoint) with its id recorded as the author, and
is refused with 403 in words on another seat's area and on the instructor's commands.

    /usr/bin/python3 test_shipped_exercises.py DROOPLINE_BINARY SOURCE_DIR
"""
import glob
import json
import os
import sys
import unittest

import websockets

import test_server as ts
from test_server import TOKEN, next_of, run


def exercises():
    return sorted(glob.glob(os.path.join(ts.SRC, "scenarios", "exercises", "*.json")))


class ShippedExercises(unittest.TestCase):

    def test_there_are_three(self):
        self.assertEqual(len(exercises()), 3)

    def test_each_runs_with_two_seats(self):
        for path in exercises():
            with self.subTest(exercise=os.path.basename(path)):
                self.check_one(path)

    def check_one(self, path):
        with open(path) as fh:
            ex = json.load(fh)
        units = ex["scenario"]["units"]
        srv = ts.Server(path, option="--exercise")
        try:
            s, body, _ = srv.request("GET", "/api/v1/seats", token=TOKEN)
            self.assertEqual(s, 200, body)
            seats = body["seats"]
            self.assertEqual(len(seats), 2)
            self.assertEqual([x["id"] for x in seats], [x["id"] for x in ex["seats"]])
            a, b = seats
            self.assertFalse(a["joined"])
            s, role, _ = srv.request("GET", "/api/v1/role", token=a["join_code"].lower())
            self.assertEqual((s, role["role"], role["seat"]["id"]), (200, "seat", a["id"]))
            # Its own area: start its reserve unit if it has one that is off, else change a setpoint.
            own = [u for u in units if u["area"] in a["areas"]]
            off = [u for u in own if u.get("online") is False]
            cmd = ({"kind": "unit_start", "unit": off[0]["id"], "mw": off[0]["rating_mw"] / 2} if off else
                   {"kind": "setpoint", "unit": own[0]["id"], "mw": own[0]["setpoint_mw"] - 5})
            s, reply, _ = srv.request("POST", "/api/v1/commands", cmd, token=a["join_code"])
            self.assertEqual(s, 200, reply)
            self.assertEqual(reply["by"], a["id"])
            # Another seat's unit, and a trip of its own unit: 403, each named in words.
            theirs = [u for u in units if u["area"] in b["areas"]][0]
            s, reply, _ = srv.request("POST", "/api/v1/commands",
                                      [{"kind": "setpoint", "unit": theirs["id"], "mw": theirs["setpoint_mw"]},
                                       {"kind": "unit_trip", "unit": own[0]["id"]}], token=a["join_code"])
            self.assertEqual(s, 403, reply)
            self.assertIn(f'which seat "{a["id"]}" does not answer for', " ".join(reply["issues"]))
            self.assertIn("may not send unit_trip", " ".join(reply["issues"]))
            # The seat is seen as joined; the event log names it as the author of its command.
            s, body, _ = srv.request("GET", "/api/v1/seats", token=TOKEN)
            self.assertTrue(body["seats"][0]["joined"])
            self.assertFalse(body["seats"][1]["joined"])
            s, events, _ = srv.request("GET", "/api/v1/events")
            self.assertIn(a["id"], [e.get("by") for e in events["events"] if e.get("kind") == "command"])

            # Over WebSocket: the other seat signs in with its code and acts on its own area.
            async def go():
                async with websockets.connect(srv.ws_url(), max_size=2**24) as ws:
                    await ws.send(json.dumps({"type": "auth", "token": b["join_code"], "id": 1}))
                    auth = await next_of(ws, "auth")
                    await ws.send(json.dumps({"type": "commands", "id": 2, "commands": {
                        "kind": "agc", "area": b["areas"][0], "enabled": True, "mode": "constant_frequency"}}))
                    return auth, await next_of(ws, "reply")
            auth, reply = run(go())
            self.assertTrue(auth["ok"], auth)
            self.assertEqual((auth["role"], auth["seat"]["id"]), ("seat", b["id"]))
            self.assertEqual(reply["status"], 200, reply)
            self.assertEqual(reply["body"]["by"], b["id"])
            # A seat sees nothing of what is to come: the script is the instructor's, the scenario has no events.
            s, reply, _ = srv.request("GET", "/api/v1/script", token=a["join_code"])
            self.assertEqual(s, 403, reply)
            self.assertIn("only the instructor sees and changes the exercise's script", reply["error"])
            s, scen, _ = srv.request("GET", "/api/v1/scenario", token=a["join_code"])
            self.assertEqual(s, 200)
            text = json.dumps(scen)
            for event in ex["script"]:
                self.assertNotIn(event["note"], text)
            self.assertEqual(scen.get("events", []), [])
            # Acknowledging is a seat's right (an unknown alarm: 404, not a role refusal).
            s, reply, _ = srv.request("POST", "/api/v1/alarms/999/ack", token=a["join_code"])
            self.assertEqual(s, 404, reply)
            # Viewers see the briefing but no join codes.
            s, body, _ = srv.request("GET", "/api/v1/exercise")
            self.assertEqual(s, 200)
            self.assertEqual(body["briefing"], ex["briefing"])
            self.assertNotIn(a["join_code"], json.dumps(body))
        finally:
            srv.stop()


def main():
    ts.BIN, ts.SRC = sys.argv[1], sys.argv[2]
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


if __name__ == "__main__":
    main()
