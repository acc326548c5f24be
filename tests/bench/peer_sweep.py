#!/usr/bin/python3
"""Benchmark peer for sweeps: a vectorized NumPy ensemble of one fleet (peer_fleet.py's equations).

Every member's states sit in one (states, members) array, one vectorized right-hand side steps
them all, and ONE solve_ivp (RK45, rtol 1e-6, atol 1e-6) integrates the whole ensemble. Members
are the grid of two varied fields, the last one fastest (droopline sweep's order): the droop of
one unit and the size of the load step.

    peer_sweep.py FLEET.json --droop UNIT_ID V1,V2,... --mw V1,V2,...

The fleet starts in equilibrium (demand = the setpoints' sum), so the solve starts at the load
step and runs to the end. The nadir is taken on a 0.05 s grid over the 20 s after the step and
refined by a parabola through the lowest sample and its neighbours. Prints JSON: solve_s (the
solve_ivp call only, its sampling included), nfev, members and nadir_hz per member in grid order.
"""
import argparse
import json
import time

import numpy as np
from scipy.integrate import solve_ivp

from peer_fleet import fleet_model


def values(text):
    return [float(v) for v in text.split(",")]


def nadirs(t, f):
    """Lowest value of each column of f (samples at times t, rows), refined by a parabola."""
    k = np.clip(np.argmin(f, axis=0), 1, len(t) - 2)
    cols = np.arange(f.shape[1])
    a, b, c = f[k - 1, cols], f[k, cols], f[k + 1, cols]
    den = a - 2.0 * b + c
    # Vertex of the parabola through three equally spaced samples; a flat run keeps the sample.
    shift = np.where(den > 0.0, 0.5 * (a - c) / np.where(den > 0.0, den, 1.0), 0.0)
    return np.minimum(b, b - 0.25 * (a - c) * shift)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("scenario")
    ap.add_argument("--droop", nargs=2, metavar=("UNIT_ID", "VALUES"), required=True)
    ap.add_argument("--mw", type=values, required=True)
    args = ap.parse_args()
    with open(args.scenario) as fh:
        sc = json.load(fh)
    unit_id, droop_values = args.droop[0], values(args.droop[1])
    ids = [u["id"] for u in sc["units"]]
    if unit_id not in ids:
        raise SystemExit(f"peer_sweep: no unit \"{unit_id}\" in {args.scenario}")
    members = len(droop_values) * len(args.mw)
    base = np.array([u.get("governor", {}).get("droop", 0.05) for u in sc["units"]], dtype=float)
    droop = np.repeat(base[:, None], members, axis=1)
    droop[ids.index(unit_id)] = np.repeat(droop_values, len(args.mw))  # mw varies fastest
    rhs, x0, extra = fleet_model(sc, droop)
    extra[0] = np.tile(np.array(args.mw, dtype=float), len(droop_values))
    f0 = sc["nominal_hz"]
    t_ev = sc["events"][0]["at_s"]
    t_end = sc["duration_s"]
    t_eval = np.round(np.arange(t_ev, min(t_ev + 20.0, t_end) + 1e-9, 0.05), 9)
    t0 = time.perf_counter()
    sol = solve_ivp(rhs, (t_ev, t_end), x0, method="RK45", rtol=1e-6, atol=1e-6, t_eval=t_eval)
    solve_s = time.perf_counter() - t0
    if not sol.success:
        raise SystemExit("peer_sweep: solve_ivp failed: " + sol.message)
    df = sol.y[:members].T  # row 0 of the (states, members) array: every member's df, by time
    print(json.dumps({"solve_s": solve_s, "nfev": int(sol.nfev), "members": members,
                      "nadir_hz": (f0 + nadirs(sol.t, df)).tolist()}))


if __name__ == "__main__":
    main()
