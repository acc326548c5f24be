#!/usr/bin/python3
"""Independent reference solution of droopline's model equations with SciPy.

Written from the model notes (swing equation per area, sinusoidal ties with damping, droop
governors with deadband, steam / reheat / hydro / gas turbines, batteries with synthetic inertia)
without sharing code with the engine. Integrates with solve_ivp (DOP853, rtol 1e-9) piecewise
between load-step events and writes the same columns as `droopline run` writes to series.csv.

Scope: the features the trajectory tests use. Scenarios with secondary control, ramps, limits
that bind, shedding or other event kinds are refused, not approximated.

Run with Debian's interpreter (python3-scipy): /usr/bin/python3 solve_reference.py --out DIR FILE...
"""
import argparse
import json
import math
import os
import sys

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import fsolve

DEFAULTS_GOV = {"mode": "droop", "droop": 0.05, "deadband_hz": 0.0, "deadband": "offset",
                "lag_s": 0.2, "integral_s": 10.0}
DEFAULTS_TURB = {"steam_chest_s": 0.3, "reheat_s": 7.0, "hp_fraction": 0.3, "water_s": 1.0,
                 "fuel_s": 0.4, "combustion_s": 0.1, "response_s": 0.1,
                 "synthetic_inertia_s": 0.0, "rocof_filter_s": 0.1, "soc": 0.5}


class Model:
    def __init__(self, sc):
        self.f0 = sc.get("nominal_hz", 50.0)
        self.areas = sc["areas"]
        self.ties = sc.get("ties", [])
        self.units = sc["units"]
        for a in self.areas:
            if a.get("agc", {}).get("enabled") or a.get("shedding"):
                raise SystemExit("reference: secondary control and shedding are out of scope")
        self.aidx = {a["id"]: i for i, a in enumerate(self.areas)}
        na = len(self.areas)
        self.na = na
        # Unit parameters and state layout: one list entry per unit.
        self.layout = []
        n = 2 * na
        self.M = np.zeros(na)
        for u in self.units:
            g = dict(DEFAULTS_GOV, **u.get("governor", {}))
            t = dict(DEFAULTS_TURB, **u["turbine"])
            typ = t["type"]
            a = self.aidx[u["area"]]
            S = u["rating_mw"]
            if typ != "battery":
                self.M[a] += 2.0 * u["inertia_s"] * S / self.f0
            nstates = {"steam": 2, "reheat": 3, "hydro": 3, "gas": 3, "battery": 2}[typ]
            if g["mode"] != "droop":
                raise SystemExit("reference: isochronous mode is out of scope")
            if "ramp_mw_per_s" in u:
                raise SystemExit("reference: ramp limits are out of scope")
            entry = dict(typ=typ, area=a, S=S, set=u["setpoint_mw"], g=g, t=t, off=n,
                         K=S / (g["droop"] * self.f0))
            if typ == "hydro":
                Tw = t["water_s"]
                TM = 2.0 * u["inertia_s"]
                RT = t.get("temporary_droop", (2.3 - (Tw - 1.0) * 0.15) * Tw / TM)
                TR = t.get("reset_s", (5.0 - (Tw - 1.0) * 0.5) * Tw)
                entry.update(RT=RT, TR=TR)
            if typ == "battery":
                entry["cap"] = t["energy_mwh"]
            self.layout.append(entry)
            n += nstates
        self.n = n
        self.dmp = np.array([a.get("load_damping", 1.0) * a["demand_mw"] / self.f0 for a in self.areas])
        self.pd0 = np.array([a["demand_mw"] for a in self.areas], dtype=float)
        self.extra = np.zeros(na)

    def deadband(self, e, g):
        db = g["deadband_hz"]
        if g["deadband"] == "offset":
            return math.copysign(max(abs(e) - db, 0.0), e)
        return e if abs(e) > db else 0.0

    def initial_state(self):
        x = np.zeros(self.n)
        for u in self.layout:
            o, p = u["off"], u["set"]
            if u["typ"] == "steam":
                x[o:o + 2] = [p, p]
            elif u["typ"] in ("reheat", "gas"):
                x[o:o + 3] = [p, p, p]
            elif u["typ"] == "hydro":
                x[o:o + 3] = [p, p, p]  # lead-lag state, gate, water column state
            elif u["typ"] == "battery":
                x[o:o + 2] = [0.0, p]  # washout state, power
        # Steady tie angles from the per-area surplus (area 0 is the reference of one island).
        surplus = -self.pd0.copy()
        for u in self.layout:
            surplus[u["area"]] += u["set"]
        if self.ties and self.na > 1:
            def mismatch(th_rest):
                th = np.concatenate([[0.0], th_rest])
                out = -surplus.copy()
                for t in self.ties:
                    f = t["pmax_mw"] * math.sin(th[self.aidx[t["from"]]] - th[self.aidx[t["to"]]])
                    out[self.aidx[t["from"]]] += f
                    out[self.aidx[t["to"]]] -= f
                return out[1:]
            sol = fsolve(mismatch, np.zeros(self.na - 1), xtol=1e-12)
            x[self.na:2 * self.na] = np.concatenate([[0.0], sol])
        return x

    def flows(self, x):
        out = []
        for t in self.ties:
            a, b = self.aidx[t["from"]], self.aidx[t["to"]]
            out.append(t["pmax_mw"] * math.sin(x[self.na + a] - x[self.na + b]) +
                       t.get("damping_mw_per_hz", 0.0) * (x[a] - x[b]))
        return out

    def outputs(self, x):
        pm = []
        for u in self.layout:
            o = u["off"]
            if u["typ"] == "steam":
                pm.append(x[o + 1])
            elif u["typ"] == "reheat":
                fhp = u["t"]["hp_fraction"]
                pm.append(fhp * x[o + 1] + (1.0 - fhp) * x[o + 2])
            elif u["typ"] == "hydro":
                pm.append(3.0 * x[o + 2] - 2.0 * x[o + 1])
            elif u["typ"] == "gas":
                pm.append(x[o + 2])
            else:
                pm.append(x[o + 1])
        return pm

    def rhs(self, _t, x):
        na = self.na
        dx = np.zeros(self.n)
        df = x[:na]
        gen = np.zeros(na)
        for u, p in zip(self.layout, self.outputs(x)):
            gen[u["area"]] += p
        net = np.zeros(na)
        for t, f in zip(self.ties, self.flows(x)):
            net[self.aidx[t["from"]]] += f
            net[self.aidx[t["to"]]] -= f
        load = self.pd0 + self.extra + self.dmp * df
        dx[:na] = (gen - load - net) / self.M
        dx[na:2 * na] = 2.0 * math.pi * df
        for u in self.layout:
            o, a, g, t = u["off"], u["area"], u["g"], u["t"]
            e = self.deadband(-df[a], g)
            ref = u["set"] + u["K"] * e
            if u["typ"] == "steam":
                dx[o] = (ref - x[o]) / g["lag_s"]
                dx[o + 1] = (x[o] - x[o + 1]) / t["steam_chest_s"]
            elif u["typ"] == "reheat":
                dx[o] = (ref - x[o]) / g["lag_s"]
                dx[o + 1] = (x[o] - x[o + 1]) / t["steam_chest_s"]
                dx[o + 2] = (x[o + 1] - x[o + 2]) / t["reheat_s"]
            elif u["typ"] == "hydro":
                # (1 + s TR) / (1 + s TR RT / R) on the reference, then the gate servo.
                Ta = u["TR"] * u["RT"] / g["droop"]
                w = x[o]
                comp = w + (u["TR"] / Ta) * (ref - w)
                dx[o] = (ref - w) / Ta
                dx[o + 1] = (comp - x[o + 1]) / g["lag_s"]
                dx[o + 2] = (x[o + 1] - x[o + 2]) / (t["water_s"] / 2.0)
            elif u["typ"] == "gas":
                dx[o] = (ref - x[o]) / g["lag_s"]
                dx[o + 1] = (min(x[o], t.get("load_limit_mw", u["S"])) - x[o + 1]) / t["fuel_s"]
                dx[o + 2] = (x[o + 1] - x[o + 2]) / t["combustion_s"]
            else:
                rocof = (df[a] - x[o]) / t["rocof_filter_s"]
                ref -= 2.0 * t["synthetic_inertia_s"] * u["S"] * rocof / self.f0
                dx[o] = rocof
                dx[o + 1] = (ref - x[o + 1]) / t["response_s"]
        return dx


def solve(path, out_dir):
    with open(path) as fh:
        sc = json.load(fh)
    m = Model(sc)
    dur = sc["duration_s"]
    every = sc.get("output_every_s", 0.1)
    times = np.round(np.arange(0.0, dur + every / 2, every), 9)
    events = sorted(sc.get("events", []), key=lambda e: e["at_s"])
    for e in events:
        if e["kind"] != "load_step":
            raise SystemExit("reference: only load_step events are in scope, got " + e["kind"])
    cuts = [0.0] + [e["at_s"] for e in events] + [dur]
    x = m.initial_state()
    rows = []
    for k in range(len(cuts) - 1):
        t0, t1 = cuts[k], cuts[k + 1]
        if k > 0:
            ev = events[k - 1]
            m.extra[m.aidx[ev["area"]]] += ev["mw"]
        if t1 <= t0:
            continue
        last = k == len(cuts) - 2
        mask = (times >= t0 - 1e-9) & ((times <= t1 + 1e-9) if last else (times < t1 - 1e-9))
        te = np.clip(times[mask], t0, t1)
        t_eval = np.append(te, t1) if (len(te) == 0 or te[-1] < t1) else te
        sol = solve_ivp(m.rhs, (t0, t1), x, method="DOP853", rtol=1e-9, atol=1e-9, t_eval=t_eval)
        if not sol.success:
            raise SystemExit("reference: solve_ivp failed: " + sol.message)
        for i in range(len(te)):
            xi = sol.y[:, i]
            rows.append([sol.t[i]] + list(m.f0 + xi[:m.na]) + m.outputs(xi) + m.flows(xi))
        x = sol.y[:, -1]
    cols = (["t_s"] + [a["id"] + ".f_hz" for a in sc["areas"]] +
            [u["id"] + ".p_mw" for u in sc["units"]] + [t["id"] + ".flow_mw" for t in sc.get("ties", [])])
    os.makedirs(out_dir, exist_ok=True)
    name = os.path.splitext(os.path.basename(path))[0] + ".csv"
    tmp = os.path.join(out_dir, "." + name + ".partial")
    with open(tmp, "w") as fh:
        fh.write(",".join(cols) + "\n")
        for r in rows:
            fh.write(",".join(repr(float(v)) for v in r) + "\n")
    os.replace(tmp, os.path.join(out_dir, name))
    print(f"reference: {path}: {len(rows)} rows -> {os.path.join(out_dir, name)}")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", required=True)
    ap.add_argument("files", nargs="+")
    args = ap.parse_args()
    for f in args.files:
        solve(f, args.out)


if __name__ == "__main__":
    sys.exit(main())
