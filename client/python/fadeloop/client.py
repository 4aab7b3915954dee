"""The fadeloop client: connect to a fadeloopd (or `fadeloop serve`) and call
Simulate, Sweep, Tune and Capacity with plain Python values.

Scenarios may be given as a ``fadeloop.v1.Scenario`` message, a dict in the
protojson form of scenario files (proto field names, enum names as
strings), or a path to a JSON scenario file (YAML too when PyYAML is
installed). Unknown fields are an error, as in scenario files.
"""
from __future__ import annotations

import json
import os
from typing import Any, Callable, Dict, Iterable, Iterator, List, Mapping, Optional, Sequence, Union

import grpc
from google.protobuf import json_format

from .errors import from_rpc_error
from .v1 import scenario_pb2, simulation_pb2, simulation_pb2_grpc, tune_pb2

__all__ = ["Client", "connect", "load_scenario", "SweepCall"]

ScenarioLike = Union[scenario_pb2.Scenario, Mapping[str, Any], str, os.PathLike]

# Messages up to 64 MiB: a report with traces of many users is large.
_MAX_MESSAGE = 64 << 20

_OBJECTIVES = {
    "sir_error_std": tune_pb2.OBJECTIVE_KIND_MIN_SIR_ERROR_STD,
    "std": tune_pb2.OBJECTIVE_KIND_MIN_SIR_ERROR_STD,
    "outage": tune_pb2.OBJECTIVE_KIND_MIN_OUTAGE,
    "tx_power": tune_pb2.OBJECTIVE_KIND_MIN_TX_POWER,
    "power": tune_pb2.OBJECTIVE_KIND_MIN_TX_POWER,
}

_SEED_MODES = {
    "common": simulation_pb2.SEED_MODE_COMMON,
    "per_point": simulation_pb2.SEED_MODE_PER_POINT,
}


def load_scenario(scenario: ScenarioLike) -> scenario_pb2.Scenario:
    """A Scenario message from a message, a protojson dict or a file path
    (.json; .yaml/.yml when PyYAML is installed). Raises ValueError naming
    the problem (e.g. an unknown field)."""
    if isinstance(scenario, scenario_pb2.Scenario):
        out = scenario_pb2.Scenario()
        out.CopyFrom(scenario)
        return out
    if isinstance(scenario, (str, os.PathLike)):
        path = os.fspath(scenario)
        with open(path, encoding="utf-8") as f:
            text = f.read()
        if path.endswith((".yaml", ".yml")):
            try:
                import yaml  # type: ignore
            except ImportError as e:
                raise ValueError(f"{path}: YAML scenario files need PyYAML (python3-yaml); use the JSON form") from e
            data = yaml.safe_load(text)
        else:
            try:
                data = json.loads(text)
            except json.JSONDecodeError as e:
                raise ValueError(f"{path}: not JSON: {e}") from e
        try:
            return json_format.ParseDict(data, scenario_pb2.Scenario())
        except json_format.ParseError as e:
            raise ValueError(f"{path}: {e}") from e
    if isinstance(scenario, Mapping):
        try:
            return json_format.ParseDict(dict(scenario), scenario_pb2.Scenario())
        except json_format.ParseError as e:
            raise ValueError(f"scenario: {e}") from e
    raise TypeError(f"scenario: want a Scenario, a dict or a file path, got {type(scenario).__name__}")


def _axes(axes: Union[None, Mapping[str, Sequence[float]], Iterable[simulation_pb2.SweepAxis]]) -> List[simulation_pb2.SweepAxis]:
    """Sweep axes from {path: [values]} (insertion order is axis order) or
    SweepAxis messages."""
    if axes is None:
        return []
    if isinstance(axes, Mapping):
        return [simulation_pb2.SweepAxis(path=p, values=[float(v) for v in vs]) for p, vs in axes.items()]
    return list(axes)


def _set_slots(sc: scenario_pb2.Scenario, slots: Optional[int]) -> None:
    """Override the run length in slots (warm-up included); run.duration_s
    is cleared, since a scenario gives one or the other."""
    if slots is not None:
        sc.run.slots = int(slots)
        sc.run.duration_s = 0


class SweepCall:
    """A running sweep: iterate it for the points (``SweepPoint`` messages,
    in completion order, as they arrive). After the last point, ``summary``
    holds the closing ``SweepSummary``. ``cancel()`` stops the call on the
    server."""

    def __init__(self, stream):
        self._stream = stream
        self.summary: Optional[simulation_pb2.SweepSummary] = None

    def __iter__(self) -> Iterator[simulation_pb2.SweepPoint]:
        try:
            for msg in self._stream:
                kind = msg.WhichOneof("event")
                if kind == "point":
                    yield msg.point
                elif kind == "summary":
                    self.summary = msg.summary
        except grpc.RpcError as e:
            raise from_rpc_error(e) from None

    def cancel(self) -> None:
        self._stream.cancel()


class Client:
    """A connection to a fadeloop server.

    ``target`` is host:port (or any gRPC target such as dns:///name:port).
    ``timeout`` (seconds) is the default deadline of every call; None means
    no client deadline (the server still caps every call). Pass
    ``credentials`` (grpc.ssl_channel_credentials(...)) for TLS.
    """

    def __init__(self, target: str, *, timeout: Optional[float] = None,
                 credentials: Optional[grpc.ChannelCredentials] = None):
        opts = [("grpc.max_receive_message_length", _MAX_MESSAGE),
                ("grpc.max_send_message_length", _MAX_MESSAGE)]
        if credentials is None:
            self._channel = grpc.insecure_channel(target, options=opts)
        else:
            self._channel = grpc.secure_channel(target, credentials, options=opts)
        self._sim = simulation_pb2_grpc.SimulationServiceStub(self._channel)
        self.timeout = timeout
        self.target = target

    def close(self) -> None:
        self._channel.close()

    def __enter__(self) -> "Client":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def _deadline(self, timeout: Optional[float]) -> Optional[float]:
        return self.timeout if timeout is None else timeout

    def wait_ready(self, timeout: float = 10.0) -> None:
        """Wait until the channel is connected; raises Unavailable otherwise."""
        try:
            grpc.channel_ready_future(self._channel).result(timeout=timeout)
        except grpc.FutureTimeoutError:
            from .errors import Unavailable
            raise Unavailable(grpc.StatusCode.UNAVAILABLE, f"{self.target} not reachable within {timeout} s") from None

    # --- Simulate -------------------------------------------------------
    def simulate(self, scenario: ScenarioLike, *, slots: Optional[int] = None, seed: Optional[int] = None,
                 replications: Optional[int] = None, trace_decimation_slots: int = 0,
                 trace_samples_per_user: int = 0, trace_users: Sequence[int] = (), on_progress: Optional[Callable[[Any], None]] = None,
                 timeout: Optional[float] = None):
        """Run one scenario and return its ``RunReport``. ``slots``, ``seed``
        and ``replications`` override the scenario's run settings;
        ``trace_decimation_slots`` > 0 asks for traces (one sample every so
        many slots) of ``trace_users`` (default the first users);
        ``trace_samples_per_user`` > 0 asks for about that many samples per
        traced user instead, the server picking the decimation.
        ``on_progress`` is called with each ``Progress`` event."""
        sc = load_scenario(scenario)
        _set_slots(sc, slots)
        if seed is not None:
            sc.run.seed = int(seed)
        if replications is not None:
            sc.run.replications = int(replications)
        req = simulation_pb2.SimulateRequest(scenario=sc)
        if trace_decimation_slots or trace_samples_per_user:
            req.traces.decimation_slots = int(trace_decimation_slots)
            req.traces.samples_per_user = int(trace_samples_per_user)
            req.traces.users.extend(int(u) for u in trace_users)
        report = None
        try:
            for msg in self._sim.Simulate(req, timeout=self._deadline(timeout)):
                kind = msg.WhichOneof("event")
                if kind == "progress" and on_progress is not None:
                    on_progress(msg.progress)
                elif kind == "report":
                    report = msg.report
        except grpc.RpcError as e:
            raise from_rpc_error(e) from None
        if report is None:
            raise RuntimeError("the Simulate stream ended without a report")
        return report

    # --- Sweep ----------------------------------------------------------
    def sweep(self, base: ScenarioLike, axes: Union[Mapping[str, Sequence[float]], Iterable[Any]], *,
              seed_mode: str = "common", points: Sequence[int] = (), detailed: bool = False,
              slots: Optional[int] = None, timeout: Optional[float] = None) -> SweepCall:
        """Start a sweep over ``axes`` ({path: [values]}, e.g.
        {"inner_loop.step_db": [0.5, 1, 2]}) and return a SweepCall that
        yields each point as it finishes. ``seed_mode`` is "common" (every
        point the base seed: paired comparisons) or "per_point"; ``points``
        limits the call to those grid indices (a retried point gives the
        same answer)."""
        sc = load_scenario(base)
        _set_slots(sc, slots)
        if seed_mode not in _SEED_MODES:
            raise ValueError(f"seed_mode {seed_mode!r}: must be one of {', '.join(_SEED_MODES)}")
        req = simulation_pb2.SweepRequest(base=sc, axes=_axes(axes), seed_mode=_SEED_MODES[seed_mode],
                                          point_indices=[int(p) for p in points], detailed=detailed)
        return SweepCall(self._sim.Sweep(req, timeout=self._deadline(timeout)))

    # --- Tune -----------------------------------------------------------
    def tune(self, base: ScenarioLike, axes: Union[None, Mapping[str, Sequence[float]], Iterable[Any]] = None, *,
             speeds_kmh: Sequence[float] = (), conditions: Sequence[Union[Mapping[str, Any], Any]] = (),
             objective: str = "sir_error_std", outage_limit: Optional[float] = None,
             confidence: Optional[float] = None, min_replications: Optional[int] = None,
             max_replications: Optional[int] = None, max_user_slots: Optional[int] = None,
             skip_baseline: bool = False, slots: Optional[int] = None,
             on_progress: Optional[Callable[[Any], None]] = None, timeout: Optional[float] = None):
        """Find the best setting on a grid and return the ``Recommendation``.

        ``speeds_kmh`` adds one condition per speed (weight 1) setting
        speeds[0].speed_kmh of every group; ``conditions`` are Condition
        messages or dicts ({"name": ..., "weight": ..., "overrides":
        [{"path": ..., "number": ...}]}). ``objective`` is "sir_error_std",
        "outage" or "tx_power" (which needs ``outage_limit``)."""
        sc = load_scenario(base)
        _set_slots(sc, slots)
        if objective not in _OBJECTIVES:
            raise ValueError(f"objective {objective!r}: must be one of sir_error_std, outage, tx_power")
        req = simulation_pb2.TuneRequest(base=sc, axes=_axes(axes), skip_baseline=skip_baseline)
        req.objective.kind = _OBJECTIVES[objective]
        if outage_limit is not None:
            req.objective.outage_limit = float(outage_limit)
        if confidence is not None:
            req.confidence = float(confidence)
        if min_replications is not None:
            req.budget.min_replications = int(min_replications)
        if max_replications is not None:
            req.budget.max_replications = int(max_replications)
        if max_user_slots is not None:
            req.budget.max_user_slots = int(max_user_slots)
        for c in conditions:
            req.conditions.append(json_format.ParseDict(dict(c), tune_pb2.Condition()) if isinstance(c, Mapping) else c)
        for v in speeds_kmh:
            cd = req.conditions.add(name=f"{float(v):g} km/h", weight=1)
            for g in range(len(sc.groups)):
                cd.overrides.add(path=f"groups[{g}].speeds[0].speed_kmh", number=float(v))
        rec = None
        try:
            for msg in self._sim.Tune(req, timeout=self._deadline(timeout)):
                kind = msg.WhichOneof("event")
                if kind == "progress" and on_progress is not None:
                    on_progress(msg.progress)
                elif kind == "recommendation":
                    rec = msg.recommendation
        except grpc.RpcError as e:
            raise from_rpc_error(e) from None
        if rec is None:
            raise RuntimeError("the Tune stream ended without a recommendation")
        return rec

    # --- Capacity -------------------------------------------------------
    def capacity(self, base: ScenarioLike, *, group: int = 0, outage_limit: float = 0.05,
                 min_count: Optional[int] = None, max_count: Optional[int] = None,
                 replications: Optional[int] = None, slots: Optional[int] = None,
                 on_progress: Optional[Callable[[Any], None]] = None, timeout: Optional[float] = None):
        """The largest count of ``group`` whose outage stays within
        ``outage_limit``; returns the ``CapacityResult``."""
        sc = load_scenario(base)
        _set_slots(sc, slots)
        req = tune_pb2.CapacityRequest(base=sc, group=int(group), outage_limit=float(outage_limit))
        if min_count is not None:
            req.min_count = int(min_count)
        if max_count is not None:
            req.max_count = int(max_count)
        if replications is not None:
            req.replications = int(replications)
        res = None
        try:
            for msg in self._sim.Capacity(req, timeout=self._deadline(timeout)):
                kind = msg.WhichOneof("event")
                if kind == "progress" and on_progress is not None:
                    on_progress(msg.progress)
                elif kind == "result":
                    res = msg.result
        except grpc.RpcError as e:
            raise from_rpc_error(e) from None
        if res is None:
            raise RuntimeError("the Capacity stream ended without a result")
        return res


def connect(target: str, **kwargs) -> Client:
    """A Client for ``target`` (host:port); see Client for the options."""
    return Client(target, **kwargs)
