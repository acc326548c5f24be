#!/usr/bin/python3
"""Benchmark peer: the droop-fleet equations as an engineer would script them in SciPy.

One area, a vectorized NumPy right-hand side over all units (grouped by turbine type), solve_ivp
(RK45, rtol 1e-6, atol 1e-6) in two pieces around the load step, t_eval at the scenario's output
times. Prints JSON: solve_s (the two solve_ivp calls only), nfev, and the frequency at each output
time. Scope: one area, load_step events, no secondary control or shedding (the bench fleets).
"""
import json
import sys
import time

import numpy as np
from scipy.integrate import solve_ivp

# Defaults of the scenario format (model notes, sec. 1).
GOV = {"mode": "droop", "droop": 0.05, "deadband_hz": 0.0, "deadband": "offset", "lag_s": 0.2}
TURB = {"steam_chest_s": 0.3, "reheat_s": 7.0, "hp_fraction": 0.3, "water_s": 1.0, "fuel_s": 0.4,
        "combustion_s": 0.1, "response_s": 0.1, "synthetic_inertia_s": 0.0, "rocof_filter_s": 0.1,
        "soc": 0.5}


def fleet_model(sc, droop=None):
    """The fleet's right-hand side over M members at once: every state is a row of M values.

    droop: None (one member, the file's droops) or a (units, M) array, one column per member.
    Returns (rhs, x0, extra): rhs(t, x) on the flattened (states, M) array, the initial state, and
    extra, the list whose first item is the load added to the area (MW, scalar or per member).
    """
    f0 = sc["nominal_hz"]
    area = sc["areas"][0]
    units = sc["units"]
    typ = np.array([u["turbine"]["type"] for u in units])
    col = lambda v: np.array(v, dtype=float)[:, None]  # one value per unit, the same for every member
    S = col([u["rating_mw"] for u in units])
    H = np.array([u.get("inertia_s", 0.0) for u in units], dtype=float)
    P0 = col([u["setpoint_mw"] for u in units])
    lo = col([u.get("min_mw", -u["rating_mw"] if u["turbine"]["type"] == "battery" else 0.0) for u in units])
    hi = col([u.get("max_mw", u["rating_mw"]) for u in units])
    gov = [dict(GOV, **u.get("governor", {})) for u in units]
    R = col([g["droop"] for g in gov]) if droop is None else np.asarray(droop, dtype=float)
    members = R.shape[1]
    db = col([g["deadband_hz"] for g in gov])
    step_db = np.array([g["deadband"] == "step" for g in gov])[:, None]
    Tg = col([g["lag_s"] for g in gov])
    K = S / (R * f0)
    M = 2.0 * np.sum(H * S[:, 0] * (typ != "battery")) / f0
    dmp = area.get("load_damping", 1.0) * area["demand_mw"] / f0
    pd0 = area["demand_mw"]

    def turbine(u):
        t = dict(TURB, **u["turbine"])
        if t["type"] == "hydro":  # transient droop design rule of the model notes
            Tw, TM = t["water_s"], 2.0 * u["inertia_s"]
            t.setdefault("temporary_droop", (2.3 - (Tw - 1.0) * 0.15) * Tw / TM)
            t.setdefault("reset_s", (5.0 - (Tw - 1.0) * 0.5) * Tw)
        t.setdefault("load_limit_mw", u["rating_mw"])
        return t

    turb = [turbine(u) for u in units]

    def tp(name, key):
        return col([t[key] for t in turb if t["type"] == name])

    idx = {t: np.flatnonzero(typ == t) for t in ("steam", "reheat", "hydro", "gas", "battery")}
    st_T = tp("steam", "steam_chest_s")
    rh_T, rh_Tr, rh_F = tp("reheat", "steam_chest_s"), tp("reheat", "reheat_s"), tp("reheat", "hp_fraction")
    hy_Tw, hy_RT, hy_TR = tp("hydro", "water_s"), tp("hydro", "temporary_droop"), tp("hydro", "reset_s")
    hy_R = R[idx["hydro"]]
    hy_Ta = hy_TR * hy_RT / hy_R
    hy_g = hy_R / hy_RT
    gt_Tf, gt_Tc, gt_L = tp("gas", "fuel_s"), tp("gas", "combustion_s"), tp("gas", "load_limit_mw")
    bt_Tf, bt_Tr, bt_Hs = tp("battery", "rocof_filter_s"), tp("battery", "response_s"), tp("battery", "synthetic_inertia_s")
    bt_S = S[idx["battery"]]

    # State rows: [df, steam(pv, pm), reheat(pv, x, y), hydro(w, pv, z), gas(pv, x, pm), battery(q, p)]
    sizes = [len(idx["steam"]) * 2, len(idx["reheat"]) * 3, len(idx["hydro"]) * 3,
             len(idx["gas"]) * 3, len(idx["battery"]) * 2]
    offs = np.cumsum([1] + sizes)
    x0 = np.zeros((offs[-1], members))
    x0[offs[0]:offs[1]] = np.tile(P0[idx["steam"]], (2, 1))
    x0[offs[1]:offs[2]] = np.tile(P0[idx["reheat"]], (3, 1))
    x0[offs[2]:offs[3]] = np.tile(P0[idx["hydro"]], (3, 1))
    x0[offs[3]:offs[4]] = np.tile(P0[idx["gas"]], (3, 1))
    nb = len(idx["battery"])
    x0[offs[4] + nb:offs[5]] = P0[idx["battery"]]
    extra = [0.0]

    def valve_rate(ref, pv, T, l, h):
        r = (ref - pv) / T
        r = np.where((pv >= h) & (r > 0), 0.0, r)
        return np.where((pv <= l) & (r < 0), 0.0, r)

    def rhs(_t, xf):
        x = xf.reshape(-1, members)
        df = x[0]
        e = -df
        ed = np.where(step_db, np.where(abs(e) > db, e, 0.0), np.sign(e) * np.maximum(abs(e) - db, 0.0))
        ref = P0 + K * ed
        dx = np.empty_like(x)
        gen = 0.0
        i = idx["steam"]; s = x[offs[0]:offs[1]].reshape(2, -1, members); d = dx[offs[0]:offs[1]].reshape(2, -1, members)
        d[0] = valve_rate(ref[i], s[0], Tg[i], lo[i], hi[i]); d[1] = (s[0] - s[1]) / st_T; gen += s[1].sum(axis=0)
        i = idx["reheat"]; s = x[offs[1]:offs[2]].reshape(3, -1, members); d = dx[offs[1]:offs[2]].reshape(3, -1, members)
        d[0] = valve_rate(ref[i], s[0], Tg[i], lo[i], hi[i]); d[1] = (s[0] - s[1]) / rh_T
        d[2] = (s[1] - s[2]) / rh_Tr; gen += (rh_F * s[1] + (1 - rh_F) * s[2]).sum(axis=0)
        i = idx["hydro"]; s = x[offs[2]:offs[3]].reshape(3, -1, members); d = dx[offs[2]:offs[3]].reshape(3, -1, members)
        u = hy_g * ref[i] + (1 - hy_g) * s[0]
        d[0] = (ref[i] - s[0]) / hy_Ta; d[1] = valve_rate(u, s[1], Tg[i], lo[i], hi[i])
        d[2] = (s[1] - s[2]) / (hy_Tw / 2); gen += (3 * s[2] - 2 * s[1]).sum(axis=0)
        i = idx["gas"]; s = x[offs[3]:offs[4]].reshape(3, -1, members); d = dx[offs[3]:offs[4]].reshape(3, -1, members)
        d[0] = valve_rate(ref[i], s[0], Tg[i], lo[i], hi[i]); d[1] = (np.minimum(s[0], gt_L) - s[1]) / gt_Tf
        d[2] = (s[1] - s[2]) / gt_Tc; gen += s[2].sum(axis=0)
        i = idx["battery"]; s = x[offs[4]:offs[5]].reshape(2, -1, members); d = dx[offs[4]:offs[5]].reshape(2, -1, members)
        rocof = (df - s[0]) / bt_Tf
        bref = np.clip(ref[i] - 2 * bt_Hs * bt_S * rocof / f0, lo[i], hi[i])
        d[0] = rocof; d[1] = (bref - s[1]) / bt_Tr; gen += s[1].sum(axis=0)
        dx[0] = (gen - (pd0 + extra[0] + dmp * df)) / M
        return dx.ravel()

    return rhs, x0.ravel(), extra


def main(path):
    with open(path) as fh:
        sc = json.load(fh)
    f0 = sc["nominal_hz"]
    n = len(sc["units"])
    rhs, x0, extra = fleet_model(sc)
    every = sc.get("output_every_s", 0.1)
    times = np.round(np.arange(0.0, sc["duration_s"] + every / 2, every), 9)
    ev = sc["events"][0]
    t_ev = ev["at_s"]
    nfev = 0
    t0 = time.perf_counter()
    a = solve_ivp(rhs, (0.0, t_ev), x0, method="RK45", rtol=1e-6, atol=1e-6,
                  t_eval=times[times <= t_ev])
    extra[0] = ev["mw"]
    b = solve_ivp(rhs, (t_ev, sc["duration_s"]), a.y[:, -1], method="RK45", rtol=1e-6, atol=1e-6,
                  t_eval=times[times > t_ev])
    solve_s = time.perf_counter() - t0
    nfev = a.nfev + b.nfev
    f = list(f0 + a.y[0]) + list(f0 + b.y[0])
    print(json.dumps({"solve_s": solve_s, "nfev": int(nfev), "units": n, "f_hz": f}))


if __name__ == "__main__":
    main(sys.argv[1])
