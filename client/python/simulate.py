#!/usr/bin/python3
"""Call fadeloop's SimulationService.Simulate from Python.

Stubs are generated from the repository's .proto files at start-up, into a
temporary directory, with Debian's python3-grpc-tools; the call goes through
python3-grpcio. Nothing is installed or written into the repository.

    apt-get install -y python3-grpcio python3-grpc-tools
    /usr/bin/python3 client/python/simulate.py --server 127.0.0.1:8470 \
        --scenario testdata/scenarios/dense_urban_macro.json --slots 6000

Prints the progress events, then the aggregate figures of the report, and
exits 0; exits 2 when the server rejects the request (each field violation
printed as "path: rule") and 3 when the server cannot be reached.
"""
import argparse
import glob
import os
import sys
import tempfile

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
# Every file of the fadeloop.v1 API (they import each other), plus the
# vendored validation rules they import.
PROTOS = sorted(os.path.relpath(p, os.path.join(REPO, "proto"))
                for p in glob.glob(os.path.join(REPO, "proto", "fadeloop", "v1", "*.proto"))) + \
    ["buf/validate/validate.proto"]


def generate_stubs(out_dir):
    """Run protoc (from grpc_tools) on the repository's protos into out_dir."""
    import grpc_tools
    from grpc_tools import protoc
    well_known = os.path.join(os.path.dirname(grpc_tools.__file__), "_proto")
    args = ["protoc",
            "-I" + os.path.join(REPO, "proto", "vendor-validate"),
            "-I" + os.path.join(REPO, "proto"),
            "-I" + well_known,
            "--python_out=" + out_dir, "--grpc_python_out=" + out_dir] + PROTOS
    if protoc.main(args) != 0:
        sys.exit("protoc failed on " + " ".join(PROTOS))
    sys.path.insert(0, out_dir)


# The two google.rpc messages a rejected call carries in its
# "grpc-status-details-bin" trailer, written out here (wire-compatible
# subsets) so that no googleapis package is needed.
RPC_PROTO = """
syntax = "proto3";
package google.rpc;
import "google/protobuf/any.proto";
message Status { int32 code = 1; string message = 2; repeated google.protobuf.Any details = 3; }
message BadRequest {
  message FieldViolation { string field = 1; string description = 2; }
  repeated FieldViolation field_violations = 1;
}
"""


def generate_rpc_stubs(out_dir):
    import grpc_tools
    from grpc_tools import protoc
    src = os.path.join(out_dir, "rpcsrc")
    os.makedirs(os.path.join(src, "fadeloop_rpc"))
    with open(os.path.join(src, "fadeloop_rpc", "rpc_status.proto"), "w") as f:
        f.write(RPC_PROTO)
    well_known = os.path.join(os.path.dirname(grpc_tools.__file__), "_proto")
    if protoc.main(["protoc", "-I" + src, "-I" + well_known, "--python_out=" + out_dir,
                    "fadeloop_rpc/rpc_status.proto"]) != 0:
        sys.exit("protoc failed on the google.rpc subset")


def bad_request_violations(err):
    """(field, rule) pairs of the google.rpc.BadRequest in a rejected call."""
    from fadeloop_rpc import rpc_status_pb2
    out = []
    for key, value in (err.trailing_metadata() or ()):
        if key != "grpc-status-details-bin":
            continue
        status = rpc_status_pb2.Status.FromString(value)
        for detail in status.details:
            if detail.type_url.endswith("/google.rpc.BadRequest"):
                br = rpc_status_pb2.BadRequest.FromString(detail.value)
                out.extend((v.field, v.description) for v in br.field_violations)
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--server", required=True, help="host:port of fadeloopd")
    ap.add_argument("--scenario", required=True, help="scenario file (protojson, JSON)")
    ap.add_argument("--slots", type=int, default=0, help="override run.slots (0: keep)")
    ap.add_argument("--timeout", type=float, default=120, help="call deadline in s")
    a = ap.parse_args()

    with tempfile.TemporaryDirectory(prefix="fadeloop-stubs-") as tmp:
        generate_stubs(tmp)
        generate_rpc_stubs(tmp)
        import grpc
        from google.protobuf import json_format
        from fadeloop.v1 import scenario_pb2, simulation_pb2, simulation_pb2_grpc

        with open(a.scenario) as f:
            scenario = json_format.Parse(f.read(), scenario_pb2.Scenario())
        if a.slots > 0:
            scenario.run.slots = a.slots
            scenario.run.duration_s = 0
            scenario.run.warmup_slots = min(scenario.run.warmup_slots, a.slots // 5)
        req = simulation_pb2.SimulateRequest(scenario=scenario, progress_interval_ms=200)

        with grpc.insecure_channel(a.server) as channel:
            stub = simulation_pb2_grpc.SimulationServiceStub(channel)
            report = None
            try:
                for event in stub.Simulate(req, timeout=a.timeout):
                    kind = event.WhichOneof("event")
                    if kind == "progress":
                        p = event.progress
                        print("progress %5.1f%%  %.0f user-slots/s" % (100 * p.fraction_done, p.user_slots_per_s),
                              file=sys.stderr)
                    elif kind == "report":
                        report = event.report
            except grpc.RpcError as err:
                if err.code() == grpc.StatusCode.INVALID_ARGUMENT:
                    for field, rule in bad_request_violations(err) or [("", err.details())]:
                        print("%s: %s" % (field, rule), file=sys.stderr)
                    return 2
                if err.code() == grpc.StatusCode.UNAVAILABLE:
                    print("server unreachable: %s" % err.details(), file=sys.stderr)
                    return 3
                print("%s: %s" % (err.code().name, err.details()), file=sys.stderr)
                return 1
    if report is None:
        print("the stream ended without a report", file=sys.stderr)
        return 1
    g = report.aggregate
    print("scenario        %s" % report.normalised_scenario.name)
    print("users           %d" % g.users)
    print("slots           %d x %d replication(s), seed %d" % (report.slots, report.replications, report.seed))
    print("SIR error std   %.3f dB  [%.3f, %.3f]" % (g.sir_error_std_db.value, g.sir_error_std_db.ci_low,
                                                   g.sir_error_std_db.ci_high))
    print("outage          %.3f %%" % (100 * g.outage_probability.value))
    print("Tx power mean   %.2f dBm" % g.tx_power_mean_dbm.value)
    print("user-slots/s    %.0f" % report.user_slots_per_s)
    return 0


if __name__ == "__main__":
    sys.exit(main())
