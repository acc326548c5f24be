#!/usr/bin/python3
"""An independent reader of the COMTRADE records `droopline record` writes, written from
IEEE C37.111-1999 (the configuration file's line order and fields, and the ASCII data file, as
that revision defines them; written from memory of the standard, whose text is not at hand here)
rather than from droopline's code. It parses the .cfg and .dat back and checks every
channel, sample and time stamp against the series.csv of `droopline run` on the same scenario.

    /usr/bin/python3 test_comtrade.py DROOPLINE_BINARY SOURCE_DIR
"""
import csv
import datetime
import os
import subprocess
import sys
import tempfile
import scratch  # noqa: F401,E402  (every temporary folder under one, removed at exit)

BIN, SRC = sys.argv[1], sys.argv[2]
SCENARIO = os.path.join(SRC, "scenarios", "demo_three_areas.json")
work = tempfile.mkdtemp(prefix="droopline-comtrade-")
subprocess.run([BIN, "run", SCENARIO, "--out", os.path.join(work, "run"), "--quiet"], check=True)
subprocess.run([BIN, "record", SCENARIO, "--out", os.path.join(work, "rec"), "--from", "190", "--to", "260",
                "--start", "2026-12-01T09:30:00Z", "--name", "trip", "--quiet"], check=True)


def read_cfg(path):
    with open(path, newline="") as fh:
        raw = fh.read()
    assert raw.endswith("\r\n"), "lines end with CR LF"
    lines = raw.split("\r\n")[:-1]
    it = iter(lines)
    station, device, rev = next(it).split(",")
    tt, na, nd = next(it).split(",")
    assert na.endswith("A") and nd.endswith("D")
    n_analog, n_digital = int(na[:-1]), int(nd[:-1])
    assert int(tt) == n_analog + n_digital
    analog = []
    for _ in range(n_analog):
        f = next(it).split(",")
        assert len(f) == 13, f
        analog.append({"n": int(f[0]), "id": f[1], "ph": f[2], "ccbm": f[3], "uu": f[4], "a": float(f[5]), "b": float(f[6]),
                       "skew": float(f[7]), "min": int(f[8]), "max": int(f[9]), "primary": float(f[10]),
                       "secondary": float(f[11]), "ps": f[12]})
    for _ in range(n_digital):
        next(it)
    lf = float(next(it))
    nrates = int(next(it))
    rates = [tuple(next(it).split(",")) for _ in range(nrates)]
    first = datetime.datetime.strptime(next(it), "%d/%m/%Y,%H:%M:%S.%f")
    trigger = datetime.datetime.strptime(next(it), "%d/%m/%Y,%H:%M:%S.%f")
    ft = next(it)
    timemult = float(next(it))
    assert next(it, None) is None, "nothing after the time multiplier"
    return dict(station=station, device=device, rev=rev, analog=analog, n_digital=n_digital, lf=lf,
                rates=[(float(r), int(e)) for r, e in rates], first=first, trigger=trigger, ft=ft, timemult=timemult)


cfg = read_cfg(os.path.join(work, "rec", "trip.cfg"))
assert cfg["rev"] == "1999", cfg["rev"]
assert cfg["device"] == "droopline"
assert cfg["station"].startswith("Tri-valley interconnection")
assert cfg["ft"] == "ASCII" and cfg["timemult"] == 1.0 and cfg["lf"] == 50.0 and cfg["n_digital"] == 0

with open(os.path.join(work, "run", "series.csv")) as fh:
    series = list(csv.reader(fh))
header, body = series[0], [[float(x) for x in r] for r in series[1:]]
window = [r for r in body if 190 - 1e-9 <= r[0] <= 260 + 1e-9]
assert [c["id"] for c in cfg["analog"]] == header[1:], "one analog channel per series column, in order"
assert [c["n"] for c in cfg["analog"]] == list(range(1, len(header)))
for c in cfg["analog"]:
    assert c["uu"] == ("Hz" if c["id"].endswith("f_hz") else "MW"), c
    assert c["ccbm"] == c["id"].rsplit(".", 1)[0] and c["ps"] == "P" and c["primary"] == c["secondary"] == 1
    assert c["min"] == -99999 and c["max"] == 99999 and c["skew"] == 0

assert cfg["rates"] == [(10.0, len(window))], cfg["rates"]  # output_every_s 0.1 s
start = datetime.datetime(2026, 12, 1, 9, 30, 0)
assert cfg["first"] == start + datetime.timedelta(seconds=190), cfg["first"]
assert cfg["trigger"] == start + datetime.timedelta(seconds=200), cfg["trigger"]  # the unit trip

with open(os.path.join(work, "rec", "trip.dat"), newline="") as fh:
    dat = fh.read().split("\r\n")
assert dat[-1] == ""
rows = [line.split(",") for line in dat[:-1]]
assert len(rows) == len(window)
worst = 0.0
for k, (r, ref) in enumerate(zip(rows, window)):
    assert int(r[0]) == k + 1
    assert abs(int(r[1]) * cfg["timemult"] - round((ref[0] - 190) * 1e6)) <= 1, (r[1], ref[0])
    assert len(r) == 2 + len(cfg["analog"])
    for c, x, v in zip(cfg["analog"], r[2:], ref[1:]):
        xi = int(x)
        assert c["min"] <= xi <= c["max"]
        value = c["a"] * xi + c["b"]
        err = abs(value - v)
        assert err <= c["a"] / 2 * 1.001 + 1e-12, (c["id"], k, value, v, c["a"])
        worst = max(worst, err / c["a"])
print(f"{len(rows)} samples x {len(cfg['analog'])} channels read back; worst error {worst:.3f} of one step of a")
