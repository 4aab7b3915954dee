"""fadeloop: a Python client of the fadeloop uplink power-control simulator.

    import fadeloop
    with fadeloop.connect("127.0.0.1:8470", timeout=600) as c:
        rep = c.simulate("testdata/scenarios/dense_urban_macro.json", slots=6000)
        print(rep.aggregate.sir_error_std_db.value)
        points = []
        for point in c.sweep(rep.normalised_scenario, {"inner_loop.step_db": [0.5, 1, 2]}):
            print(point.index, point.report.aggregate.outage_probability.value)  # as each finishes
            points.append(point)
        df = fadeloop.sweep_frame(points, ["inner_loop.step_db"])   # with pandas

Results are the API's messages (fadeloop.v1, generated stubs in
fadeloop.v1); fadeloop.frames turns them into rows or pandas DataFrames.
A rejected request raises fadeloop.InvalidRequest with the server's field
violations.

Simulated settings do not replace the operator's radio planning, the
regulatory limits on transmit power and exposure, or licensed practice.
"""
from .client import Client, SweepCall, connect, load_scenario
from .errors import (Cancelled, DeadlineExceeded, FadeloopError, FieldViolation, InvalidRequest,
                     ResourceExhausted, Unavailable)
from .frames import (candidate_rows, candidates_frame, figure_rows, figures_frame, figures_row,
                     have_pandas, sweep_frame, sweep_rows, user_rows, users_frame)
from .v1 import report_pb2, scenario_pb2, simulation_pb2, tune_pb2

__version__ = "0.1.0"

__all__ = [
    "Client", "SweepCall", "connect", "load_scenario",
    "FadeloopError", "InvalidRequest", "ResourceExhausted", "Unavailable", "DeadlineExceeded",
    "Cancelled", "FieldViolation",
    "figure_rows", "figures_row", "user_rows", "sweep_rows", "candidate_rows",
    "figures_frame", "users_frame", "sweep_frame", "candidates_frame", "have_pandas",
    "report_pb2", "scenario_pb2", "simulation_pb2", "tune_pb2",
]
