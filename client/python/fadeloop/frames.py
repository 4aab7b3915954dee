"""Results as tables: lists of row dicts always, pandas DataFrames when
pandas is installed (python3-pandas).

Column names are the proto field names of the figures, each with
``_ci_low`` and ``_ci_high`` beside it (95 % confidence intervals of the
run), as in the CLI's CSV output; proportions stay fractions (0..1).
"""
from __future__ import annotations

from typing import Any, Dict, Iterable, List, Optional, Sequence

__all__ = ["figures_row", "figure_rows", "user_rows", "sweep_rows", "candidate_rows",
           "figures_frame", "users_frame", "sweep_frame", "candidates_frame", "have_pandas"]

# (column, getter) for every Estimate of a Figures message.
_ESTIMATES = [
    ("sir_error_mean_db", lambda f: f.sir_error_mean_db),
    ("sir_error_std_db", lambda f: f.sir_error_std_db),
    ("sir_error_p1_db", lambda f: f.sir_error_percentiles_db.p1),
    ("sir_error_p5_db", lambda f: f.sir_error_percentiles_db.p5),
    ("sir_error_p50_db", lambda f: f.sir_error_percentiles_db.p50),
    ("sir_error_p95_db", lambda f: f.sir_error_percentiles_db.p95),
    ("sir_error_p99_db", lambda f: f.sir_error_percentiles_db.p99),
    ("outage_probability", lambda f: f.outage_probability),
    ("achieved_bler", lambda f: f.achieved_bler),
    ("bler_target_error", lambda f: f.bler_target_error),
    ("tx_power_mean_dbm", lambda f: f.tx_power_mean_dbm),
    ("tx_power_p1_dbm", lambda f: f.tx_power_percentiles_dbm.p1),
    ("tx_power_p5_dbm", lambda f: f.tx_power_percentiles_dbm.p5),
    ("tx_power_p50_dbm", lambda f: f.tx_power_percentiles_dbm.p50),
    ("tx_power_p95_dbm", lambda f: f.tx_power_percentiles_dbm.p95),
    ("tx_power_p99_dbm", lambda f: f.tx_power_percentiles_dbm.p99),
    ("max_power_fraction", lambda f: f.max_power_fraction),
    ("noise_rise_mean_db", lambda f: f.noise_rise_mean_db),
    ("noise_rise_p95_db", lambda f: f.noise_rise_p95_db),
    ("convergence_time_s", lambda f: f.convergence_time_s),
]


def have_pandas() -> bool:
    try:
        import pandas  # noqa: F401
    except ImportError:
        return False
    return True


def _frame(rows: List[Dict[str, Any]], index: Optional[str] = None):
    try:
        import pandas as pd
    except ImportError as e:
        raise ImportError("DataFrames need pandas (apt-get install python3-pandas); "
                          "the *_rows functions give the same data as lists of dicts") from e
    df = pd.DataFrame(rows)
    if index is not None and index in df.columns:
        df = df.set_index(index)
    return df


def figures_row(figures) -> Dict[str, Any]:
    """One row of a Figures message: users, user_slots and every figure
    with its interval."""
    row: Dict[str, Any] = {"users": figures.users, "user_slots": figures.user_slots}
    for name, get in _ESTIMATES:
        e = get(figures)
        row[name], row[name + "_ci_low"], row[name + "_ci_high"] = e.value, e.ci_low, e.ci_high
    return row


def figure_rows(report) -> List[Dict[str, Any]]:
    """The aggregate figures of a RunReport, one row per figure:
    figure, value, ci_low, ci_high."""
    agg = report.aggregate
    return [{"figure": name, "value": get(agg).value, "ci_low": get(agg).ci_low, "ci_high": get(agg).ci_high}
            for name, get in _ESTIMATES]


def user_rows(report) -> List[Dict[str, Any]]:
    """One row per user of a RunReport: user, group, distance_m, speed_kmh,
    doppler_hz, path_loss_db and the user's figures."""
    out = []
    for u in report.users:
        row = {"user": u.user, "group": u.group, "distance_m": u.distance_m, "speed_kmh": u.speed_kmh,
               "doppler_hz": u.doppler_hz, "path_loss_db": u.path_loss_db}
        row.update(figures_row(u.figures))
        out.append(row)
    return out


def sweep_rows(points: Iterable[Any], axes: Sequence[Any]) -> List[Dict[str, Any]]:
    """One row per sweep point (sorted by index): index, seed, one column per
    axis (its path), feasible and the point's aggregate figures. ``axes`` are
    the axis paths, a {path: values} dict or SweepAxis messages."""
    paths = [a if isinstance(a, str) else a.path for a in (axes.keys() if hasattr(axes, "keys") else axes)]
    out = []
    for p in sorted(points, key=lambda p: p.index):
        row: Dict[str, Any] = {"index": p.index, "seed": p.seed}
        for path, v in zip(paths, p.coordinates):
            row[path] = v
        row["feasible"] = not p.report.feasibility.infeasible
        row.update(figures_row(p.report.aggregate))
        out.append(row)
    return out


def candidate_rows(recommendation) -> List[Dict[str, Any]]:
    """One row per candidate and condition of a Recommendation: condition,
    candidate, its coordinates (one column per axis path), objective mean,
    low, high and n, diff_to_best, status, feasible, best (bool) and the
    replication means of its figures."""
    cands = recommendation.candidates
    out = []
    for c in recommendation.conditions:
        for cr in c.candidates:
            row: Dict[str, Any] = {"condition": c.name, "candidate": cr.candidate}
            if 0 <= cr.candidate < len(cands):
                for co in cands[cr.candidate].coords:
                    row[co.path] = co.value
            row.update({"objective": cr.objective.mean, "objective_low": cr.objective.low,
                        "objective_high": cr.objective.high, "n": cr.objective.n,
                        "diff_to_best": cr.diff_to_best.mean, "status": cr.status, "feasible": cr.feasible,
                        "best": cr.candidate == c.decision.best})
            f = cr.figures
            for name in ("sir_error_mean_db", "sir_error_std_db", "outage_probability", "achieved_bler",
                         "tx_power_mean_dbm", "max_power_fraction", "noise_rise_mean_db"):
                row[name] = getattr(f, name).mean
            out.append(row)
    return out


def figures_frame(report):
    """figure_rows as a DataFrame indexed by figure."""
    return _frame(figure_rows(report), "figure")


def users_frame(report):
    """user_rows as a DataFrame indexed by user."""
    return _frame(user_rows(report), "user")


def sweep_frame(points, axes):
    """sweep_rows as a DataFrame indexed by point index."""
    return _frame(sweep_rows(points, axes), "index")


def candidates_frame(recommendation):
    """candidate_rows as a DataFrame."""
    return _frame(candidate_rows(recommendation))
