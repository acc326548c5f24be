#!/usr/bin/python3
"""Bad command lines: an unknown option, a missing value, a non-numeric or out-of-range number, a
missing required option or file. Each must exit 2, before any work starts, with a message on
stderr that names the option; nothing on stdout.

    /usr/bin/python3 test_cli_errors.py DROOPLINE_BINARY SOURCE_DIR
"""
import atexit
import os
import shutil
import subprocess
import sys
import tempfile
import unittest

BIN, SRC = sys.argv[1], sys.argv[2]
SCENARIO = os.path.join(SRC, "scenarios", "demo_island.json")
REQ = os.path.join(SRC, "scenarios", "requirements", "grid_code_example.json")
OUT = os.path.join(tempfile.mkdtemp(prefix="droopline-cli-"), "out")
atexit.register(shutil.rmtree, os.path.dirname(OUT), True)
MISSING = os.path.join(SRC, "no-such-file.json")
EXERCISE = os.path.join(SRC, "tests", "data", "exercise_two_areas.json")

RUN = ["run", SCENARIO, "--out", OUT]
# Port 0: if a bad value were ever accepted, the server would start on a free port and the
# timeout below would fail the case instead of taking port 8080.
SERVE = ["serve", "--scenario", SCENARIO, "--listen", "127.0.0.1:0"]
SWEEP = ["sweep", SCENARIO, "--vary", "units[0].governor.droop=0.04,0.05", "--out", OUT]
MODES = ["modes", SCENARIO]
RECORD = ["record", SCENARIO, "--out", OUT]
REPLAY = ["replay", SCENARIO, "--out", OUT]
PLANT = os.path.join(SRC, "scenarios", "validation", "plant.json")
EVENT = os.path.join(SRC, "scenarios", "validation", "recorded_event.csv")
PROFILE = os.path.join(SRC, "scenarios", "validation", "injection_profile.json")
PLAYBACK = ["playback", PLANT, "--unit", "QH1", "--measured", EVENT, "--out-dir", OUT]
FIT = ["fit", PLANT, "--unit", "QH1", "--measured", EVENT, "--out-dir", OUT]
INJECT = ["inject", PLANT, "--unit", "QH1", "--profile", PROFILE, "--out-dir", OUT]

# (arguments, what stderr must name)
CASES = [
    # run --threads
    (RUN + ["--threads"], "--threads"),
    (RUN + ["--threads", "many"], "--threads"),
    (RUN + ["--threads", "0"], "--threads"),
    (RUN + ["--threads", "1000"], "--threads"),
    (RUN + ["--threads", "-2"], "--threads"),
    (RUN + ["--threads", "4x"], "--threads"),
    (RUN + ["--bogus"], "--bogus"),
    (["run", SCENARIO], "--out"),
    (["run", "--out", OUT], "FILE"),
    (["run", MISSING, "--out", OUT], MISSING),
    (RUN + ["second.json"], "second.json"),
    # serve: numbers, limits, the listen address, the token file, the log level
    (SERVE + ["--frame-rate"], "--frame-rate"),
    (SERVE + ["--frame-rate", "fast"], "--frame-rate"),
    (SERVE + ["--frame-rate", "0"], "--frame-rate"),
    (SERVE + ["--frame-rate", "101"], "--frame-rate"),
    (SERVE + ["--frame-rate", "nan"], "--frame-rate"),
    (SERVE + ["--speed", "0.05"], "--speed"),
    (SERVE + ["--speed", "inf"], "--speed"),
    (SERVE + ["--history", "0.5"], "--history"),
    (SERVE + ["--history", "86401"], "--history"),
    (SERVE + ["--max-connections", "0"], "--max-connections"),
    (SERVE + ["--max-connections", "100001"], "--max-connections"),
    (SERVE + ["--max-connections", "ten"], "--max-connections"),
    (SERVE + ["--listen", "8080"], "--listen"),
    (SERVE + ["--listen", "127.0.0.1:65536"], "--listen"),
    (SERVE + ["--listen", "127.0.0.1:http"], "--listen"),
    (SERVE + ["--token-file", MISSING], "--token-file"),
    (SERVE + ["--log-level", "loud"], "--log-level"),
    (SERVE + ["--exercise", EXERCISE], "--exercise"),
    (["serve", "--listen", "127.0.0.1:0"], "--scenario or --exercise"),
    (["serve", "--exercise", MISSING, "--listen", "127.0.0.1:0"], "--exercise"),
    (SERVE + ["--bogus", "1"], "--bogus"),
    (["serve", "--listen", "127.0.0.1:0"], "--scenario"),
    (["serve", "--scenario", MISSING, "--listen", "127.0.0.1:0"], "--scenario"),
    # sweep --sample and the other sweep numbers
    (SWEEP + ["--sample"], "--sample"),
    (SWEEP + ["--sample", "some"], "--sample"),
    (SWEEP + ["--sample", "0"], "--sample"),
    (SWEEP + ["--sample", "1099511627777"], "--sample"),
    (SWEEP + ["--sample", "10", "--seed", "-1"], "--seed"),
    (SWEEP + ["--shard", "3/2"], "--shard"),
    (SWEEP + ["--shard", "0/2"], "--shard"),
    (SWEEP + ["--shard", "2"], "--shard"),
    (SWEEP + ["--threads", "0"], "--threads"),
    (["sweep", SCENARIO, "--out", OUT], "--vary"),
    (SWEEP + ["--vary"], "--vary"),
    (["merge", "--out", OUT], "DIR"),
    (["merge", MISSING, "--out", OUT], MISSING),
    # modes, assess, record, replay, check
    (MODES + ["--damping-threshold", "1.5"], "--damping-threshold"),
    (MODES + ["--damping-threshold", "nan"], "--damping-threshold"),
    (["assess", SCENARIO], "--requirements"),
    (["assess", SCENARIO, "--requirements", MISSING], "--requirements"),
    (["assess", SCENARIO, "--requirements", REQ, "--csv"], "--csv"),
    (RECORD + ["--from", "soon"], "--from"),
    (RECORD + ["--to", "2e9"], "--to"),
    (RECORD + ["--from", "1e8"], "lies at or after the end of the run (duration_s "),
    (RECORD + ["--from", "30", "--to", "20"], "--from 30 must lie before --to 20"),
    (RECORD + ["--start", "yesterday"], "--start"),
    (RECORD + ["--start", "2026-13-01T00:00:00Z"], "--start"),
    (RECORD + ["--name", "a/b"], "--name"),
    (RECORD + ["--name", ""], "--name"),
    (REPLAY + ["--run", "last"], "--run"),
    (REPLAY + ["--run", "1000000"], "--run"),
    (["check"], "FILE"),
    (["check", MISSING], MISSING),
    (["check", SCENARIO, "--fix"], "--fix"),
    # playback, fit, inject: the command line, then what only the recording and scenario can tell
    (["playback", PLANT, "--unit", "QH1"], "--measured"),
    (["playback", PLANT, "--measured", EVENT], "--unit"),
    (PLAYBACK + ["--threshold-hz", "0"], "--threshold-hz"),
    (["playback", PLANT, "--unit", "QH1", "--measured", MISSING], MISSING),
    (PLAYBACK[:3] + ["QX9"] + PLAYBACK[4:], 'no unit "QX9"'),
    (PLAYBACK + ["--power-column", "QH1.q_mvar"], "QH1.q_mvar"),
    (FIT, "--param"),
    (FIT + ["--param", "governor.droop=0.08:0.03"], "must be below"),
    (FIT + ["--param", "governor.droop"], "PATH=LO:HI"),
    (FIT + ["--param", "governor.speed=1:2"], "governor.speed"),
    (FIT + ["--param", "governor.droop=0:0.1"], "bound 0"),
    (FIT + ["--param", "governor.droop=0.02:0.1", "--starts", "0"], "--starts"),
    (FIT + ["--param", "governor.droop=0.02:0.1", "--shard", "3/2"], "--shard"),
    (FIT + ["--param", "governor.droop=0.02:0.1", "--param", "governor.droop=0.03:0.06"], "given twice"),
    (["sweep", SCENARIO, "--out", OUT, "--vary", "events[0].sigma_mw=1,2", "--vary", "events[0].sigma_mw=3"], "the same field"),
    (["assess", SCENARIO, "--requirements", os.path.join(SRC, "tests", "data", "requirements_unknown_unit.json")],
     "no unit \"nope\""),
    (INJECT[:2] + INJECT[4:], "--unit"),
    (["inject", PLANT, "--unit", "QH1", "--profile", MISSING], MISSING),
    (["inject", PLANT, "--unit", "QH1", "--profile", SCENARIO], "unknown field"),
    # the command itself
    ([], "subcommand"),
    (["simulate", SCENARIO], "simulate"),
]


def droopline(args, env=None):
    return subprocess.run([BIN] + args, capture_output=True, text=True, timeout=20, env=env)


class BadCommandLines(unittest.TestCase):
    def test_each_exits_2_naming_the_option(self):
        for args, named in CASES:
            with self.subTest(args=" ".join(args)):
                p = droopline(args)
                self.assertEqual(p.returncode, 2, f"stdout: {p.stdout}\nstderr: {p.stderr}")
                self.assertEqual(p.stdout, "")
                self.assertIn(named, p.stderr)
                self.assertFalse(os.path.exists(OUT), "a refused command line wrote output")

    def test_help_wins_over_a_bad_value(self):
        p = droopline(RUN + ["--threads", "0", "--help"])
        self.assertEqual((p.returncode, p.stderr), (0, ""))
        self.assertIn("droopline run", p.stdout)

    def test_help_word_is_the_help_flag(self):
        p = droopline(["help"])
        self.assertEqual((p.returncode, p.stderr), (0, ""))
        self.assertEqual(p.stdout, droopline(["--help"]).stdout)

    def test_version_names_the_kernels(self):
        p = droopline(["--version"])
        self.assertEqual((p.returncode, p.stderr), (0, ""))
        self.assertRegex(p.stdout, r"^droopline \S+ \((avx512|avx2|baseline) kernels(, the only ones in this build)?\)\n$")
        p = droopline(["--version"], env={**os.environ, "DROOPLINE_KERNELS": "baseline"})
        self.assertEqual(p.returncode, 0)
        self.assertIn("(baseline kernels", p.stdout)

    def test_unknown_kernel_variant_exits_2(self):
        env = {**os.environ, "DROOPLINE_KERNELS": "sse9"}
        for args in (["--version"], ["check", SCENARIO]):
            with self.subTest(args=args):
                p = droopline(args, env=env)
                self.assertEqual(p.returncode, 2)
                self.assertIn("DROOPLINE_KERNELS", p.stderr)

    def test_readme_shows_the_run_help(self):
        # The README's example is the real output: the indented block after "$ droopline run --help".
        with open(os.path.join(SRC, "README.md")) as fh:
            after = fh.read().split("    $ droopline run --help\n", 1)[1]
        lines = []
        for line in after.split("\n"):
            if line and not line.startswith("    "):
                break
            lines.append(line[4:])
        self.assertEqual("\n".join(lines).rstrip("\n") + "\n", droopline(["run", "--help"]).stdout)

    def test_a_journal_that_cannot_be_opened_stops_serve_with_one_message(self):
        # Before: records were opened beside it, the loop started, and the failure was told twice.
        p = subprocess.run([BIN] + SERVE + ["--journal", "/proc/no-such-folder/journal.jsonl"],
                           capture_output=True, text=True, timeout=20)
        said = p.stdout + p.stderr  # the log goes to stdout
        self.assertEqual(p.returncode, 1, said)
        self.assertEqual(len([line for line in said.splitlines() if "journal" in line]), 1, said)
        self.assertIn('cannot open journal "/proc/no-such-folder/journal.jsonl" for appending', said)
        for later in ("token", "records", "real-time loop", "listening"):
            self.assertNotIn(later, said)

    def test_accepted_forms(self):
        # The values the old hand-written parsers took keep their meaning: decimal whole numbers
        # (a leading zero is not octal), repeated options (the last wins).
        p = droopline(["check", SCENARIO])
        self.assertEqual(p.returncode, 0, p.stderr)
        p = droopline(["check", EXERCISE])  # an exercise, told apart by its seats and script
        self.assertEqual(p.returncode, 0, p.stderr)
        self.assertIn("ok: exercise", p.stdout)
        p = droopline(["modes", SCENARIO, "--damping-threshold", "0.1", "--json"])
        self.assertEqual(p.returncode, 0, p.stderr)
        p = droopline(RUN + ["--threads", "010", "--threads", "2", "--quiet"])
        self.assertEqual(p.returncode, 0, p.stderr)
        self.assertTrue(os.path.exists(os.path.join(OUT, "summary.json")))
        for f in os.listdir(OUT):
            os.remove(os.path.join(OUT, f))
        os.rmdir(OUT)


if __name__ == "__main__":
    unittest.main(argv=sys.argv[:1], verbosity=2)
