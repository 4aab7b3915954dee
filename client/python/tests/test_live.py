"""Tests of the fadeloop Python package against a live fadeloopd on loopback.

The server is the binary named by FADELOOPD, or one built with `go build`
from this repository when FADELOOPD is not set; it listens on a free
loopback port with a lowered cost bound (-max-cost 2e9) so that the
cost-bound error can be provoked cheaply. Every wait is bounded.

Run: /usr/bin/python3 -m pytest client/python/tests   (or -m unittest)
"""
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import unittest

import grpc

HERE = os.path.dirname(os.path.abspath(__file__))
REPO = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
SCENARIOS = os.path.join(REPO, "testdata", "scenarios")
SMALL = os.path.join(SCENARIOS, "small.json")

try:
    import fadeloop
except ImportError:  # run from a checkout without installing
    sys.path.insert(0, os.path.abspath(os.path.join(HERE, "..")))
    import fadeloop

_server = {}


def setUpModule():
    binary = os.environ.get("FADELOOPD")
    tmp = tempfile.mkdtemp(prefix="fadeloop-py-test-")
    _server["tmp"] = tmp
    if not binary:
        if shutil.which("go") is None:
            raise unittest.SkipTest("set FADELOOPD to a fadeloopd binary (go is not on PATH to build one)")
        binary = os.path.join(tmp, "fadeloopd")
        subprocess.run(["go", "build", "-o", binary, "./service/cmd/fadeloopd"], cwd=REPO, check=True, timeout=600)
    log = open(os.path.join(tmp, "server.log"), "w+")
    proc = subprocess.Popen([binary, "-listen", "127.0.0.1:0", "-metrics-listen", "", "-log-format", "text",
                             "-max-cost", "2000000000"], stdout=log, stderr=subprocess.STDOUT)
    _server["proc"], _server["log"] = proc, log
    deadline = time.monotonic() + 20
    addr = None
    while time.monotonic() < deadline and addr is None:
        if proc.poll() is not None:
            log.seek(0)
            raise RuntimeError("fadeloopd exited early:\n" + log.read())
        log.seek(0)
        m = re.search(r"grpc_addr=(\S+)", log.read())
        if m:
            addr = m.group(1)
        else:
            time.sleep(0.05)
    if addr is None:
        raise RuntimeError("fadeloopd did not report its address within 20 s")
    _server["addr"] = addr
    c = fadeloop.connect(addr, timeout=300)
    c.wait_ready(timeout=20)
    c.close()


def tearDownModule():
    proc = _server.get("proc")
    if proc is not None:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)
    if _server.get("log"):
        _server["log"].close()
    shutil.rmtree(_server.get("tmp", ""), ignore_errors=True)


class LiveTest(unittest.TestCase):
    def setUp(self):
        self.c = fadeloop.connect(_server["addr"], timeout=300)

    def tearDown(self):
        self.c.close()


class TestSimulate(LiveTest):
    def test_report_matches_scenario(self):
        progress = []
        rep = self.c.simulate(SMALL, slots=1500, on_progress=progress.append)
        # small.json: 4 users, run.seed 7, 2 replications (testdata/scenarios/small.json).
        self.assertEqual(rep.aggregate.users, 4)
        self.assertEqual(rep.seed, 7)
        self.assertEqual(rep.slots, 1500 - 300)  # measured slots: run.slots less the 300 warm-up slots
        self.assertEqual(rep.replications, 2)
        self.assertEqual(len(rep.users), 4)
        self.assertTrue(rep.engine_version.startswith("fadeloop-loop/"), rep.engine_version)
        for f in (rep.aggregate.sir_error_std_db, rep.aggregate.outage_probability):
            self.assertLessEqual(f.ci_low, f.value)
            self.assertLessEqual(f.value, f.ci_high)
        o = rep.aggregate.outage_probability
        self.assertTrue(0 <= o.ci_low and o.ci_high <= 1, o)
        if progress:
            self.assertLessEqual(progress[-1].fraction_done, 1.0)

    def test_slots_override_clears_duration(self):
        # dense_urban_macro.json gives its run length as run.duration_s.
        sc = fadeloop.load_scenario(os.path.join(SCENARIOS, "dense_urban_macro.json"))
        self.assertGreater(sc.run.duration_s, 0)
        rep = self.c.simulate(sc, slots=3000, replications=1)
        self.assertEqual(rep.slots, 3000 - 1500)  # its 1500 warm-up slots are not measured

    def test_deterministic_in_seed(self):
        a = self.c.simulate(SMALL, slots=1500, seed=11)
        b = self.c.simulate(SMALL, slots=1500, seed=11)
        d = self.c.simulate(SMALL, slots=1500, seed=12)
        self.assertEqual(a.aggregate, b.aggregate)  # bit for bit
        self.assertNotEqual(a.aggregate, d.aggregate)

    def test_traces(self):
        rep = self.c.simulate(SMALL, slots=1500, trace_decimation_slots=10, trace_users=[0, 3])
        self.assertEqual(sorted(t.user for t in rep.traces), [0, 3])
        # 1500 slots after 300 warm-up slots, one sample every 10 slots, per
        # replication 0: (300 + 1500) / 10 = 180 samples (warm-up included).
        self.assertGreater(len(rep.traces[0].slots), 100)
        self.assertEqual(len(rep.traces[0].slots), len(rep.traces[0].sir_db))

    def test_trace_samples_per_user(self):
        # The server picks the decimation: one sample every floor(1500/150) =
        # 10 slots of the 1500 (warm-up included), so 150 samples per user.
        rep = self.c.simulate(SMALL, slots=1500, trace_samples_per_user=150, trace_users=[1])
        self.assertEqual([t.user for t in rep.traces], [1])
        self.assertGreaterEqual(len(rep.traces[0].slots), 150)
        self.assertLessEqual(len(rep.traces[0].slots), 151)

    def test_scenario_forms(self):
        import json
        with open(SMALL) as f:
            d = json.load(f)
        msg = fadeloop.load_scenario(SMALL)
        self.assertEqual(fadeloop.load_scenario(d), msg)
        self.assertEqual(fadeloop.load_scenario(msg), msg)
        d["inner_loop"]["stepsize_db"] = 1
        with self.assertRaises(ValueError) as cm:
            fadeloop.load_scenario(d)
        self.assertIn("stepsize_db", str(cm.exception))


class TestSweep(LiveTest):
    AXES = {"inner_loop.step_db": [0.5, 1, 2]}

    def test_points_stream_and_frame(self):
        call = self.c.sweep(SMALL, self.AXES, slots=1500)
        points = []
        for p in call:
            self.assertIsNone(call.summary, "a point arrived after the summary")
            points.append(p)
        self.assertEqual(sorted(p.index for p in points), [0, 1, 2])
        self.assertIsNotNone(call.summary)
        self.assertEqual(call.summary.points_computed, 3)
        rows = fadeloop.sweep_rows(points, self.AXES)
        self.assertEqual([r["inner_loop.step_db"] for r in rows], [0.5, 1.0, 2.0])
        # With a one-bit loop at 3 km/h the SIR error is dominated by the
        # step's own dither, so its spread grows with the step size
        # (common practice); the short runs' intervals are about ±0.05 dB.
        stds = [r["sir_error_std_db"] for r in rows]
        self.assertLess(stds[0], stds[1])
        self.assertLess(stds[1], stds[2])
        if fadeloop.have_pandas():
            df = fadeloop.sweep_frame(points, self.AXES)
            self.assertEqual(list(df.index), [0, 1, 2])
            self.assertIn("outage_probability_ci_high", df.columns)

    def test_retried_point_is_identical(self):
        full = {p.index: p for p in self.c.sweep(SMALL, self.AXES, slots=1500)}
        again = list(self.c.sweep(SMALL, self.AXES, slots=1500, points=[1]))
        self.assertEqual(len(again), 1)
        self.assertEqual(again[0].index, 1)
        self.assertEqual(again[0].report.aggregate, full[1].report.aggregate)

    def test_bad_seed_mode(self):
        with self.assertRaises(ValueError):
            self.c.sweep(SMALL, self.AXES, seed_mode="random")


class TestTune(LiveTest):
    def test_recommendation_and_frame(self):
        rec = self.c.tune(SMALL, {"inner_loop.step_db": [0.5, 1, 2]}, speeds_kmh=[3], slots=1500, max_replications=4)
        self.assertEqual(len(rec.candidates), 3)
        self.assertEqual([c.name for c in rec.conditions], ["3 km/h"])
        self.assertEqual(len(rec.overall.setting.coords), 1)
        self.assertEqual(rec.overall.setting.coords[0].path, "inner_loop.step_db")
        rows = fadeloop.candidate_rows(rec)
        self.assertEqual(len(rows), 3)
        best = [r for r in rows if r["best"]]
        self.assertEqual(len(best), 1)
        self.assertEqual(best[0]["inner_loop.step_db"], rec.overall.setting.coords[0].value)
        # The best has the smallest objective mean among the candidates
        # still compared (dropped candidates were worse when dropped).
        self.assertEqual(min(r["objective"] for r in rows), best[0]["objective"])
        if fadeloop.have_pandas():
            self.assertEqual(len(fadeloop.candidates_frame(rec)), 3)


class TestErrors(LiveTest):
    def test_field_violations(self):
        sc = fadeloop.load_scenario(SMALL)
        sc.groups[0].count = 0
        sc.inner_loop.step_db = -1
        with self.assertRaises(fadeloop.InvalidRequest) as cm:
            self.c.simulate(sc)
        fields = {v.field for v in cm.exception.violations}
        self.assertIn("scenario.groups[0].count", fields)
        self.assertIn("scenario.inner_loop.step_db", fields)
        self.assertEqual(cm.exception.code, grpc.StatusCode.INVALID_ARGUMENT)
        self.assertIn("scenario.groups[0].count", str(cm.exception))

    def test_sweep_violation_raised_while_iterating(self):
        with self.assertRaises(fadeloop.InvalidRequest) as cm:
            list(self.c.sweep(SMALL, {"inner_loop.no_such_field": [1, 2]}))
        self.assertTrue(any("no_such_field" in v.field or "no_such_field" in v.description
                            for v in cm.exception.violations), cm.exception.violations)

    def test_cost_bound(self):
        # The test server's bound is 2e9 tap-slots; 4000 users × 200 000
        # slots × 2 replications × 4 taps (PEDA) is 6.4e9.
        sc = fadeloop.load_scenario(SMALL)
        sc.groups[0].count = 4000
        with self.assertRaises(fadeloop.ResourceExhausted) as cm:
            self.c.simulate(sc, slots=200000)
        self.assertIn("cost", str(cm.exception))

    def test_unreachable(self):
        import socket
        s = socket.socket()
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
        s.close()  # nothing listens there now
        with fadeloop.connect(f"127.0.0.1:{port}", timeout=5) as c:
            with self.assertRaises(fadeloop.Unavailable):
                c.simulate(SMALL, slots=1500)


class TestFrames(LiveTest):
    def test_figure_rows(self):
        rep = self.c.simulate(SMALL, slots=1500)
        rows = {r["figure"]: r for r in fadeloop.figure_rows(rep)}
        self.assertEqual(rows["outage_probability"]["value"], rep.aggregate.outage_probability.value)
        for r in rows.values():
            self.assertLessEqual(r["ci_low"], r["value"])
            self.assertLessEqual(r["value"], r["ci_high"])
        users = fadeloop.user_rows(rep)
        self.assertEqual([u["user"] for u in users], [0, 1, 2, 3])
        if fadeloop.have_pandas():
            df = fadeloop.users_frame(rep)
            self.assertEqual(len(df), 4)
            self.assertTrue((df["distance_m"] >= 100).all() and (df["distance_m"] <= 600).all())


if __name__ == "__main__":
    unittest.main()
