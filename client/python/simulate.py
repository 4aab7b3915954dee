#!/usr/bin/python3
"""Run one scenario on a fadeloop server with the fadeloop Python package.

    /usr/bin/python3 -m venv --system-site-packages V
    V/bin/pip install --no-deps --no-build-isolation client/python
    V/bin/python client/python/simulate.py --server 127.0.0.1:8470 \\
        --scenario testdata/scenarios/dense_urban_macro.json --slots 6000

Prints progress on stderr, then the aggregate figures, and exits 0; exits 2
when the server rejects the request (each field violation printed as
"path: rule") and 3 when the server cannot be reached. Run from a checkout
without installing, it uses the package beside it.
"""
import argparse
import os
import sys

try:
    import fadeloop
except ImportError:
    sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
    import fadeloop


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--server", required=True, help="host:port of fadeloopd")
    ap.add_argument("--scenario", required=True, help="scenario file (JSON; YAML with PyYAML)")
    ap.add_argument("--slots", type=int, default=0, help="override run.slots (0: keep)")
    ap.add_argument("--timeout", type=float, default=120, help="call deadline in s")
    a = ap.parse_args()

    def progress(p):
        print("progress %5.1f%%  %.0f user-slots/s" % (100 * p.fraction_done, p.user_slots_per_s), file=sys.stderr)

    try:
        sc = fadeloop.load_scenario(a.scenario)
        if a.slots > 0:
            sc.run.slots = a.slots
            sc.run.duration_s = 0
            sc.run.warmup_slots = min(sc.run.warmup_slots, a.slots // 5)
        with fadeloop.connect(a.server, timeout=a.timeout) as c:
            report = c.simulate(sc, on_progress=progress)
    except ValueError as e:
        print(e, file=sys.stderr)
        return 2
    except fadeloop.InvalidRequest as e:
        for v in e.violations or [fadeloop.FieldViolation("", e.message)]:
            print(v, file=sys.stderr)
        return 2
    except fadeloop.Unavailable as e:
        print("server unreachable: %s" % e.message, file=sys.stderr)
        return 3
    except fadeloop.FadeloopError as e:
        print(e, file=sys.stderr)
        return 1
    g = report.aggregate
    print("scenario        %s" % report.normalised_scenario.name)
    print("users           %d" % g.users)
    reps = "replication" if report.replications == 1 else "replications"
    print("slots           %d x %d %s, seed %d" % (report.slots, report.replications, reps, report.seed))
    print("SIR error std   %.3f dB  [%.3f, %.3f]" % (g.sir_error_std_db.value, g.sir_error_std_db.ci_low,
                                                   g.sir_error_std_db.ci_high))
    print("outage          %.3f %%  [%.3f, %.3f]" % (100 * g.outage_probability.value, 100 * g.outage_probability.ci_low,
                                                    100 * g.outage_probability.ci_high))
    print("mean Tx power   %.2f dBm" % g.tx_power_mean_dbm.value)
    print("user-slots/s    %.0f" % report.user_slots_per_s)
    return 0


if __name__ == "__main__":
    sys.exit(main())
