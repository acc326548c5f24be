#!/usr/bin/python3
"""Determinism pinned across builds: `droopline run` of every shipped scenario, and of a generated
fleet large enough to be stepped on several threads, must write exactly the bytes whose SHA-256
is committed below, with every kernel variant this machine can run (DROOPLINE_KERNELS) and with
one and two worker threads. The digests were taken before the restructure of the engine and the
service; a change of them is a change of behaviour and must be explained, not re-pinned blindly.

    /usr/bin/python3 test_pinned.py DROOPLINE_BINARY SOURCE_DIR [--print]
"""
import hashlib
import json
import os
import subprocess
import sys
import tempfile
import unittest
import scratch  # noqa: F401,E402  (every temporary folder under one, removed at exit)

BIN = SRC = None

# SHA-256 of series.csv and summary.json as `droopline run` writes them.
PINNED = {
    "demo_island.json": {"series.csv": "104a1db39354d2db63fba4a8544b36f1402b5061bfd9962b9a48d1d7213e259d",
                         "summary.json": "4f3e384b1acc7d9e3426c21255dea3c3c6e4697872420dbfaafc54d898d39e19"},
    "demo_three_areas.json": {"series.csv": "57bd62c1e9854deabbd549ac09a4067c0af22e34155eb75a500e60edfc8d065b",
                              "summary.json": "9a881816aed1cde06636edc69eb0326a0ace7b5ee1f24333683e97bfa64e06af"},
    "demo_unit_trip_shedding.json": {"series.csv": "261ab822c90268793c6f5c5fc1bc50bddf099403580c95b56167bf4a2ac9ded9",
                                     "summary.json": "9ec808eb210b527b86be80d38afa333184f6e661e869e9a4b7617091ab916061"},
    "textbook_droop_sharing.json": {"series.csv": "4f7d005c38930a3d35ac98d1e6b9f55c1c348613598a774c87f0a36c56872e95",
                                    "summary.json": "fe0857db6c9dc3a58cb7cdbbf2386aec02d9d86dffb2e75cc4d0a592c18a8d51"},
    "textbook_isolated_station.json": {"series.csv": "4bf1135cd198968b10a69a34c5033f2b071837ad1e6fcb6f689d88aa5fa18bbf",
                                       "summary.json": "a25fdac4ffc7a48396c64ec683a549b34f1d5ec330b600e0736fddeba49f1a7e"},
    "textbook_two_areas.json": {"series.csv": "e2f86a0e50c005569420d5f1b707670a4dca66e467ce4654de01d318fd2dd0bb",
                                "summary.json": "79b484b27b40233576e002966dc0beb9a779ad07512f958e4a0f63e1441b4e96"},
    "textbook_two_areas_agc.json": {"series.csv": "f42ebdea3372b6db0b69c47ad0ea7107d51b48f7627fef957c7d9b6978194e90",
                                    "summary.json": "a9ab34e3b87ab2394ac3f31e847714a967598216c93f715a150ccbe40c7bb338"},
    "fleet_4200": {"series.csv": "93fcc8adfbcb36070c2b84480e86bdc9609b06d7d8b0a3846414ae9a3c409648",
                   "summary.json": "f693497a252d4fdff89d7d45822bd9aa0ddaff2c0a431a91d12a8bcb4984d5ac"},
}


def fleet_scenario(units=4200):
    """A one-area fleet past the 4096-unit threshold at which a run spreads over threads; every
    turbine type, both deadband kinds, some ramp limits, a load step and a trip. Deterministic."""
    kinds = ["steam", "reheat", "hydro", "gas", "battery"]
    out = []
    total = 0.0
    for i in range(units):
        kind = kinds[i % 5]
        rating = 50.0 + (i * 37 % 200)
        set_mw = 0.0 if kind == "battery" else round(rating * (0.5 + (i * 13 % 30) / 100.0), 3)
        u = {"id": f"U{i}", "area": "plain", "rating_mw": rating, "inertia_s": 0 if kind == "battery" else 3.0 + (i % 5),
             "setpoint_mw": set_mw, "governor": {"droop": 0.03 + (i % 4) * 0.01, "deadband_hz": (i % 3) * 0.01,
                                                 "deadband": "step" if i % 7 == 0 else "offset"},
             "turbine": {"type": kind}}
        if kind == "battery":
            u["turbine"]["energy_mwh"] = 20.0
        if i % 11 == 0 and kind != "battery":
            u["ramp_mw_per_s"] = rating / 20.0
        out.append(u)
        total += set_mw
    return {"name": "pinned fleet", "nominal_hz": 50, "step_s": 0.01, "duration_s": 20, "output_every_s": 0.1,
            "areas": [{"id": "plain", "demand_mw": round(total, 3)}], "units": out,
            "events": [{"at_s": 1, "kind": "load_step", "area": "plain", "mw": total * 0.03},
                       {"at_s": 8, "kind": "unit_trip", "unit": "U1"}]}


def cases():
    """(name, scenario path, threads) for every shipped scenario and the generated fleet."""
    d = os.path.join(SRC, "scenarios")
    out = [(f, os.path.join(d, f), None) for f in sorted(os.listdir(d)) if f.endswith(".json")]
    fleet = os.path.join(tempfile.mkdtemp(prefix="droopline-pinned-"), "fleet.json")
    with open(fleet, "w") as fh:
        json.dump(fleet_scenario(), fh)
    out += [("fleet_4200", fleet, 1), ("fleet_4200", fleet, 2)]
    return out


def variants():
    """The kernel variants this machine can run (each is checked against the same digests)."""
    with open("/proc/cpuinfo") as fh:
        flags = fh.read()
    out = ["baseline"]
    if " avx2" in flags:
        out.append("avx2")
    if " avx512f" in flags:
        out.append("avx512")
    return out


def digests(path, threads, variant):
    out = tempfile.mkdtemp(prefix="droopline-pinned-out-")
    cmd = [BIN, "run", path, "--out", out, "--quiet"] + (["--threads", str(threads)] if threads else [])
    env = dict(os.environ, DROOPLINE_KERNELS=variant) if variant else dict(os.environ)
    subprocess.run(cmd, check=True, env=env, timeout=300)
    result = {}
    for f in ("series.csv", "summary.json"):
        with open(os.path.join(out, f), "rb") as fh:
            result[f] = hashlib.sha256(fh.read()).hexdigest()
    return result


class PinnedTests(unittest.TestCase):
    def test_every_scenario_writes_its_pinned_bytes_with_every_kernel_and_thread_count(self):
        all_cases = cases()
        self.assertGreaterEqual(len(all_cases), 8)
        for name, path, threads in all_cases:
            self.assertIn(name, PINNED, f"no pinned digests for {name}")
            for variant in [None] + variants():
                with self.subTest(scenario=name, threads=threads, kernels=variant or "default"):
                    self.assertEqual(digests(path, threads, variant), PINNED[name])

    def test_the_variant_asked_for_is_the_one_used(self):
        # A build with the portable kernels only (clang, the sanitizer builds) runs them for any name.
        portable = "only ones in this build" in subprocess.run([BIN, "--version"], capture_output=True, text=True,
                                                               timeout=60, check=True).stdout
        for variant in variants():
            r = subprocess.run([BIN, "--version"], env=dict(os.environ, DROOPLINE_KERNELS=variant),
                               capture_output=True, text=True, timeout=60, check=True)
            self.assertIn("(baseline kernels" if portable else f"({variant} kernels)", r.stdout)

    def test_an_unknown_kernel_variant_is_refused_with_a_message(self):
        r = subprocess.run([BIN, "run", os.path.join(SRC, "scenarios", "textbook_droop_sharing.json"), "--out",
                            tempfile.mkdtemp(), "--quiet"], env=dict(os.environ, DROOPLINE_KERNELS="sse1"),
                           capture_output=True, text=True, timeout=60)
        self.assertNotEqual(r.returncode, 0)
        self.assertIn("DROOPLINE_KERNELS", r.stderr)


def main():
    global BIN, SRC
    BIN, SRC = sys.argv[1], sys.argv[2]
    if "--print" in sys.argv:  # the digests of this build, to pin
        seen = {}
        for name, path, threads in cases():
            seen.setdefault(name, digests(path, threads, None))
        print(json.dumps(seen, indent=4))
        return
    unittest.main(argv=[sys.argv[0], "-v", *sys.argv[3:]], exit=True)


if __name__ == "__main__":
    main()
