"""The limits a session is checked against: how much a source may lose, how long a walk may last.

Every limit has a default here and may be changed per session in the manifest's
``[checks]`` table (documented in ``docs/formats/session-manifest.md``):

=========================  =======  ===================================================================
key                        default  meaning
=========================  =======  ===================================================================
``fail_lost_share``        0.5      a source that loses more than this share of its rows fails ``check``
``warn_lost_share``        0.05     above this share, a warning (CLI summary and ``qa.json`` warnings)
``fail_disorder_share``    0.5      duplicate + out-of-order rows over rows read: fail above
``warn_disorder_share``    0.05     … and warn above
``fail_coverage``          0.5      a GPS or sensor source covering less of the walk than this fails
``warn_coverage``          0.8      … and warns below this
``max_walk_h``             10       a walk longer than this is never one timeline [h]
``split_gap_h``            2        fixes further apart than this belong to different walks [h]
``outlier_max_share``      0.02     a group of fixes apart from the rest holding at most this share
                                    (and at most ``outlier_max_fixes``) is quarantined as ``time_outlier``
``outlier_max_fixes``      20
``max_still_fill_s``       600      a gap between two fixes at the same place is filled (at the last
                                    position, flagged ``qa_track_fill``) when at most this long [s]
``still_radius_m``         15       "the same place": the two fixes at most this far apart [m]
``max_sparse_gap_s``       120      a gap at walking speed (a receiver logging sparsely) is interpolated
                                    (flagged ``qa_track_fill``) when at most this long [s]
``sparse_max_speed_ms``    2.5      "walking speed" for that rule [m s⁻¹]
``vehicle_speed_ms``       4        a sustained speed above this marks a vehicle leg [m s⁻¹]
``vehicle_min_s``          30       … sustained for at least this long [s]
``accept_losses``          false    proceed although a source failed the loss limits (written to qa.json)
=========================  =======  ===================================================================

The loss and coverage defaults are a judgement (common practice in field data cleaning:
losing more than half of a record means it is the wrong file or read the wrong way, while
a few per cent lost is usual); the walk limits cover a long field walk with breaks.
"""

from __future__ import annotations

from walkcomfort.errors import InputError
from walkcomfort.session.tomlcheck import no_unknown, number

#: key -> (default, lowest allowed, highest allowed)
LIMITS: dict[str, tuple[float, float, float]] = {
    "fail_lost_share": (0.5, 0.0, 1.0),
    "warn_lost_share": (0.05, 0.0, 1.0),
    "fail_disorder_share": (0.5, 0.0, 1.0),
    "warn_disorder_share": (0.05, 0.0, 1.0),
    "fail_coverage": (0.5, 0.0, 1.0),
    "warn_coverage": (0.8, 0.0, 1.0),
    "max_walk_h": (10.0, 0.01, 48.0),
    "split_gap_h": (2.0, 0.01, 48.0),
    "outlier_max_share": (0.02, 0.0, 0.5),
    "outlier_max_fixes": (20.0, 0.0, 1e6),
    "max_still_fill_s": (600.0, 0.0, 7200.0),
    "still_radius_m": (15.0, 0.0, 500.0),
    "max_sparse_gap_s": (120.0, 0.0, 3600.0),
    "sparse_max_speed_ms": (2.5, 0.1, 10.0),
    "vehicle_speed_ms": (4.0, 1.0, 100.0),
    "vehicle_min_s": (30.0, 1.0, 3600.0),
}
CHECK_KEYS = (*LIMITS, "accept_losses")


def default_limits() -> dict:
    """Every limit at its default (``accept_losses`` false)."""
    out: dict = {k: v[0] for k, v in LIMITS.items()}
    out["accept_losses"] = False
    return out


def parse_checks(table: dict, m: str) -> dict:
    """The ``[checks]`` table of a manifest → the full set of limits (defaults filled in)."""
    no_unknown(table, CHECK_KEYS, m, "[checks]")
    out = default_limits()
    for key, (_, lo, hi) in LIMITS.items():
        if key in table:
            out[key] = number(table, key, m, "[checks]", lo=lo, hi=hi)
    if "accept_losses" in table:
        v = table["accept_losses"]
        if not isinstance(v, bool):
            raise InputError(f"accept_losses is {v!r}, expected true or false", where=f"{m} [checks] accept_losses",
                             fix="write accept_losses = true to proceed knowingly despite lost rows")
        out["accept_losses"] = v
    for a, b in (("warn_lost_share", "fail_lost_share"), ("warn_disorder_share", "fail_disorder_share")):
        if out[a] > out[b]:
            raise InputError(f"{a} = {out[a]} is above {b} = {out[b]}", where=f"{m} [checks] {a}",
                             fix=f"make {a} at most {b}")
    if out["warn_coverage"] < out["fail_coverage"]:
        raise InputError(f"warn_coverage = {out['warn_coverage']} is below fail_coverage = {out['fail_coverage']}",
                         where=f"{m} [checks] warn_coverage", fix="make warn_coverage at least fail_coverage")
    return out
