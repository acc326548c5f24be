#!/usr/bin/python3
"""A 24 h scenario run by `droopline run` streams its series to disk: every row arrives, the last
one at t = 86400 s, and the process's peak memory stays far below the series' size (the rows are
written in pieces, not held). Bounded by ctest's timeout.

    /usr/bin/python3 test_day_long_run.py DROOPLINE_BINARY SOURCE_DIR
"""
import json
import os
import resource
import subprocess
import sys
import tempfile
import scratch  # noqa: F401,E402  (every temporary folder under one, removed at exit)

BIN, SRC = sys.argv[1], sys.argv[2]
with open(os.path.join(SRC, "scenarios", "textbook_isolated_station.json")) as fh:
    scenario = json.load(fh)
scenario["name"] = "Isolated station, one day"
scenario["duration_s"] = 86400
scenario["output_every_s"] = 0.1
scenario["events"] += [{"at_s": 43200, "kind": "load_step", "area": "station", "mw": -50},
                       {"at_s": 86000, "kind": "load_step", "area": "station", "mw": 25}]
work = tempfile.mkdtemp(prefix="droopline-day-")
path = os.path.join(work, "day.json")
with open(path, "w") as fh:
    json.dump(scenario, fh)
out = os.path.join(work, "out")
subprocess.run([BIN, "run", path, "--out", out, "--quiet"], check=True)
peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss

size = os.path.getsize(os.path.join(out, "series.csv"))
rows, last = 0, None
with open(os.path.join(out, "series.csv")) as fh:
    header = fh.readline().rstrip("\n").split(",")
    for line in fh:
        rows += 1
        last = line
t_last = float(last.split(",")[0])
with open(os.path.join(out, "summary.json")) as fh:
    summary = json.load(fh)
print(f"rows {rows}, last t {t_last}, series {size / 2**20:.1f} MiB, peak RSS {peak_kib / 1024:.1f} MiB, "
      f"{len(summary['disturbances'])} disturbances")
assert header[0] == "t_s", header
assert rows == 864001, rows
assert abs(t_last - 86400.0) < 1e-6, t_last
assert len(summary["disturbances"]) == 3, summary["disturbances"]
assert size > 30 * 2**20, size                      # the series is large ...
if not os.environ.get("DROOPLINE_SANITIZED"):  # ASan's shadow memory and quarantine inflate RSS
    assert peak_kib * 1024 < size / 2, (peak_kib, size)  # ... and was never held in memory whole
