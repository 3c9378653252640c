"""A source that loses most of its rows is a failed check, with the likely cause named.

Rows set aside are never silent: the counts reconcile and the reasons are listed. But a
record that loses half its rows was almost always read the wrong way (a unit, a zone, a
time format), and the walk's timeline would then be wrong where it looks complete. For each
source :func:`assess` compares the share of rows lost, the share of duplicate and out-of-order
rows, and the coverage of the walk with the limits of :mod:`walkcomfort.session.limits`:
above the ``fail_*`` limits the session is refused (:class:`SessionRefused`, one line naming
the source, the share, the top reasons and the likely cause); above the ``warn_*`` limits a
warning goes to the summary and to ``qa.json['warnings']``. ``accept_losses`` turns the
refusal into a recorded warning.

Devices' clocks are cross-checked on the way: a source whose readings sit a whole number
of hours away from the GPS track is named as a likely time-zone error.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from walkcomfort.errors import InputError
from walkcomfort.errors import where as _where

CONTINUOUS_KINDS = ("gps", "weather", "noise", "light")
_DECIMAL_COMMA = re.compile(r"\d,\d")


class SessionRefused(InputError):
    """A session refused after reading: carries what was read so the reasons can be written.

    Attributes
    ----------
    quarantine : DataFrame
        The rows set aside so far (``source, file, row, reason, raw``).
    qa : dict or None
        The QA of the refused walk when it got that far.
    walk_id : str
    """

    def __init__(self, what, where=None, fix=None, *, quarantine=None, qa=None, walk_id=""):
        super().__init__(what, where=where, fix=fix)
        self.quarantine = quarantine
        self.qa = qa
        self.walk_id = walk_id


def refused_from(exc: InputError, quarantine: pd.DataFrame, walk_id: str, qa: dict | None = None) -> SessionRefused:
    """The same one-line error, now carrying the quarantine (for errors raised after the readers ran)."""
    if isinstance(exc, SessionRefused):
        return exc
    return SessionRefused(exc.what, where=exc.where, fix=exc.fix, quarantine=quarantine, qa=qa, walk_id=walk_id)


# --------------------------------------------------------------------------------------------
def assess(qa: dict, quarantine: pd.DataFrame, spec, spans: dict) -> tuple[list[dict], list[str]]:
    """Failures (dicts) and warning lines for every source of a built session.

    ``spans`` maps a source name to the (first, last) UTC time of its readings after the
    clock correction and before the walk window trimmed them; ``"__track__"`` is the GPS track.
    """
    limits = spec.checks
    failures: list[dict] = []
    warnings: list[str] = []
    sources = {s.name: s for s in spec.sources}
    track = spans.get("__track__")
    for name, e in qa["sources"].items():
        clock = _clock_hint(spans.get(name), track, sources[name]) if e["kind"] != "gps" else None
        failed = None
        for kind, share, fail, warn in _measures(e, limits):
            if share is None:
                continue
            if _over(kind, share, fail) and failed is None:   # one failure per source: its first check
                failed = _failure(name, e, kind, share, quarantine, sources[name], clock)
            elif _over(kind, share, warn) and not _over(kind, share, fail):
                warnings.append(_warning_line(name, e, kind, share))
        if clock and failed is None and e["rows_used"] < 0.5 * max(1, e["rows_read"]):
            failed = _clock_failure(name, e, sources[name], clock)
        elif clock and failed is not None:
            failed.update(_clock_failure(name, e, sources[name], clock))
        elif clock:
            warnings.append(f"{name}: {clock}")
        if failed is not None:
            failures.append(failed)
        if e["rows_read"] == 0:
            warnings.append(f"{name}: the file holds no rows")
    return failures, warnings


#: reasons that are not losses: rows outside the walk window ([session] start/end, or a logger
#: running before and after the walk) are trimmed on purpose; a clock error shows as low coverage
TRIMMED = ("outside_walk_window",)


def _clock_failure(name: str, e: dict, src, clock: str) -> dict:
    return {"source": name, "file": e["file"], "check": "clock", "share": None,
            "what": f"only {e['rows_used']} of {e['rows_read']} rows of source '{name}' fall on the walk",
            "cause": clock, "row": None, "where": src.display, "reasons": dict(e["quarantine_reasons"]),
            "fix": "correct the source's time_zone (or the session timezone), or add a [[sync]] event for its device"}


def _measures(e: dict, limits: dict):
    trimmed = sum(e["quarantine_reasons"].get(r, 0) for r in TRIMMED)
    read = e["rows_read"] - trimmed
    lost = (e["rows_quarantined"] - trimmed) / read if read > 0 else None
    disorder = (e.get("duplicates", 0) + e.get("out_of_order", 0)) / read if read else None
    yield "lost", lost, limits["fail_lost_share"], limits["warn_lost_share"]
    yield "disorder", disorder, limits["fail_disorder_share"], limits["warn_disorder_share"]
    if e["kind"] in CONTINUOUS_KINDS and "coverage_frac" in e:
        yield "coverage", e["coverage_frac"], limits["fail_coverage"], limits["warn_coverage"]


def _over(kind: str, share: float, limit: float) -> bool:
    return share < limit if kind == "coverage" else share > limit


def top_reasons(e: dict, n: int = 3) -> str:
    items = sorted(((k, v) for k, v in e["quarantine_reasons"].items() if k not in TRIMMED), key=lambda kv: -kv[1])[:n]
    return ", ".join(f"{k} {v}" for k, v in items)


def _warning_line(name: str, e: dict, kind: str, share: float) -> str:
    if kind == "coverage":
        return f"{name}: covers only {share:.0%} of the walk (largest gap {e.get('largest_gap_s', 0):g} s)"
    if kind == "disorder":
        return (f"{name}: {share:.0%} of rows are duplicate or out of order "
                f"({e.get('duplicates', 0)} duplicates, {e.get('out_of_order', 0)} out of order)")
    return f"{name}: {e['rows_quarantined']} of {e['rows_read']} rows quarantined ({share:.0%}: {top_reasons(e)})"


def _failure(name: str, e: dict, kind: str, share: float, quarantine: pd.DataFrame, src, clock: str | None) -> dict:
    q = quarantine[(quarantine["source"] == name) & ~quarantine["reason"].isin(TRIMMED)]
    cause, fix = likely_cause(e, q, src, clock, kind)
    if kind == "coverage":
        what = f"source '{name}' covers only {share:.0%} of the walk"
    elif kind == "disorder":
        what = (f"source '{name}' has {share:.0%} duplicate or out-of-order rows ({e.get('duplicates', 0)} "
                f"duplicates, {e.get('out_of_order', 0)} out of order)")
    else:
        n_lost = len(q)
        what = f"source '{name}' lost {share:.0%} of its rows ({n_lost} of {n_lost + e['rows_used']}: {top_reasons(e)})"
    row = int(q["row"].iloc[0]) if len(q) else None
    return {"source": name, "file": e["file"], "check": kind, "share": round(float(share), 4), "what": what,
            "cause": cause, "fix": fix, "row": row, "where": _where(src.display, line=row) if row else src.display,
            "reasons": dict(e["quarantine_reasons"])}


def likely_cause(e: dict, q: pd.DataFrame, src, clock: str | None, kind: str) -> tuple[str, str]:
    """(likely cause, fix) from the dominant reason, the declared units and the raw text."""
    if clock:
        return clock, "correct the source's time_zone (or the session timezone), or add a [[sync]] event for its device"
    reasons = {k: v for k, v in e["quarantine_reasons"].items() if k not in TRIMMED}
    top = max(reasons, key=reasons.get) if reasons else ""
    if kind == "coverage":
        return (f"readings are further apart than the maximum gap (median interval {e.get('median_interval_s')} s, "
                f"largest gap {e.get('largest_gap_s')} s)",
                "set max_gap_s on the source if the instrument logs that slowly, or check that it logged the whole walk")
    if kind == "disorder":
        top = "duplicate_time"
    for test in (_unit_cause, _number_cause, _time_cause, _place_cause):
        found = test(top, q, src)
        if found:
            return found
    return f"most rows were set aside as '{top}'", "look at the rows in the quarantine table and at the source's settings"


def _unit_cause(top: str, q: pd.DataFrame, src):
    if not top.startswith("out_of_range:"):
        return None
    col = top.split(":", 1)[1]
    field = {"t_air_c": "t_air", "t_globe_c": "t_globe", "wind_ms": "wind", "pressure_hpa": "pressure"}.get(col)
    unit = (src.units.get(field) or "").lower() if field else ""
    if field in ("t_air", "t_globe") and unit in ("degc", "°c", "c", "celsius", ""):
        return "values look like °F", f'declare units.{field} = "degF" if the logger writes Fahrenheit'
    if field in ("t_air", "t_globe") and unit in ("k", "kelvin"):
        return "values look like °C, not kelvin", f'declare units.{field} = "degC"'
    if field == "pressure":
        return "values look like another pressure unit", 'declare units.pressure as written (hPa, Pa, kPa, inHg, mmHg)'
    return f"values of {col} are outside their physical range", f"check the unit declared for {col} and the column mapping"


def _number_cause(top: str, q: pd.DataFrame, src):
    if not top.startswith("not_a_number"):
        return None
    raw = " ".join(q["raw"].head(20).astype(str))
    if src.decimal == "." and _DECIMAL_COMMA.search(raw):
        return "values use a decimal comma", 'declare decimal = "," (and delimiter = ";")'
    return "values are not numbers", "check the column mapping and add the file's missing-value marker to na_values"


def _time_cause(top: str, q: pd.DataFrame, src):
    if top in ("duplicate_time",):
        return ("times repeat: the time column may be read the wrong way (HHMM without padding, day and month "
                "swapped, seconds dropped)", "check time_format against a few raw rows (one entry per time column, "
                                             "e.g. [\"%Y-%m-%d\", \"HHMM\"])")
    if top == "no_time":
        return "points have no time", "export the recorded track with its times (a planned route has none)"
    if top == "bad_time":
        first = str(q.loc[q["reason"] == top, "raw"].iloc[0])[:60] if len(q) else ""
        return (f"times do not match time_format (first: {first!r})",
                "declare time_format for this source (a strftime pattern, epoch_s/epoch_ms, or one entry per column)")
    if top in ("nonexistent_local_time", "ambiguous_local_time"):
        return "times fall in a daylight-saving change", "declare the logger's zone (time_zone = \"UTC\" or an offset zone)"
    return None


def _place_cause(top: str, q: pd.DataFrame, src):
    if top in ("outside_walk_window", "outside_track_span", "time_outlier"):
        return ("its times do not overlap the GPS track (wrong date or clock)",
                "check the device's clock, the source's time_zone, or [session] start/end")
    if top in ("no_position", "null_position"):
        return "fixes have no position", "export the track again after the receiver had a fix"
    if top in ("unreadable_image", "no_exif_time", "image_too_large"):
        return ("the frames are not readable JPEG/PNG images with a time", "copy the frames again from the camera "
                "card, or read their time from the file name (time_from = \"filename\")")
    if top == "gps_jump":
        return "positions jump further than walking allows", "check the GPS export; a vehicle leg can be cut with start/end"
    return None


def _clock_hint(span, track, src) -> str | None:
    """A named offset when the source's readings sit hours (or days) away from the GPS track."""
    if span is None or track is None:
        return None
    (a0, a1), (b0, b1) = span, track
    overlap = (min(a1, b1) - max(a0, b0)).total_seconds()
    length = max(1.0, min((a1 - a0).total_seconds(), (b1 - b0).total_seconds()))
    if overlap / length >= 0.5:
        return None
    offset_h = (a0 - b0).total_seconds() / 3600.0
    if abs(offset_h) >= 24:
        return f"its clock looks {abs(offset_h) / 24:.1f} days {'ahead of' if offset_h > 0 else 'behind'} the GPS"
    whole = round(offset_h)
    if whole and abs(offset_h - whole) <= 5 / 60:
        return (f"its clock looks {abs(whole)} h {'ahead of' if whole > 0 else 'behind'} the GPS "
                f"(a whole number of hours: likely a time-zone error)")
    return f"its readings overlap the GPS track for only {max(0.0, overlap) / length:.0%} of the shorter span"


def refusal(failures: list[dict], quarantine: pd.DataFrame, qa: dict, walk_id: str) -> SessionRefused:
    """One error for the failed sources: the first named in full, the others counted."""
    f = failures[0]
    more = f" (and {len(failures) - 1} more failed check(s): {', '.join(x['source'] for x in failures[1:])})" \
        if len(failures) > 1 else ""
    return SessionRefused(f"{f['what']}; likely cause: {f['cause']}{more}", where=f["where"],
                          fix=f"{f['fix']}; or proceed knowingly with `ingest --accept-losses` ([checks] "
                              f"accept_losses = true)", quarantine=quarantine, qa=qa, walk_id=walk_id)


def accepted_lines(failures: list[dict]) -> list[str]:
    return [f"ACCEPTED LOSS {f['what']}; likely cause: {f['cause']}" for f in failures]


def unit_cross_check(frame: pd.DataFrame, name: str) -> str | None:
    """A globe reading far from the air temperature that °F↔°C would explain (a plausible-but-wrong unit)."""
    if not {"t_air_c", "t_globe_c"} <= set(frame.columns) or len(frame) < 10:
        return None
    ta, tg = frame["t_air_c"].to_numpy(float), frame["t_globe_c"].to_numpy(float)
    ok = np.isfinite(ta) & np.isfinite(tg)
    if ok.sum() < 10:
        return None
    d = float(np.median(tg[ok] - ta[ok]))
    as_f = float(np.median((tg[ok] - 32.0) * 5.0 / 9.0 - ta[ok]))
    if abs(d) > 20.0 and abs(as_f) < 10.0:
        return f"{name}: globe minus air temperature is {d:.0f} K; the globe values look like °F declared as °C"
    as_fa = float(np.median(tg[ok] - (ta[ok] - 32.0) * 5.0 / 9.0))
    if abs(d) > 20.0 and abs(as_fa) < 15.0:
        return f"{name}: globe minus air temperature is {d:.0f} K; the air values look like °F declared as °C"
    return None
