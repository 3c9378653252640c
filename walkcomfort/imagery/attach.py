"""Putting frame cues on the timeline so that the model sees them.

A chest camera takes a frame every few seconds; the timeline has a row every second.
:func:`add_frame_cues` gives every step the cues of the most recent *good* frame taken at
or before it, for at most ``hold_s`` seconds — the view a walker had a few seconds ago
is still a fair description of where they are (at 1.3 m s⁻¹, the default
:data:`HOLD_S` = 15 s is about 20 m of street), but not for longer: beyond the hold the
cues are NaN and the model treats them as missing. Cues never look forward in time.

Which time a frame has
----------------------
When the timeline carries a ``frame_path`` column (the ingest stage puts each frame on
its nearest step after clock correction), that step's time is the frame's time, so the
camera's clock offset and drift are honoured. Frames not on the timeline — or all of
them, when it has no ``frame_path`` column — use the time index of the cue table.

Bad frames
----------
A frame with ``frame_ok`` False does not carry its cues, so a blurred or blocked frame
does not feed the model; the step's ``frame_ok`` says whether the *latest* frame within
the hold passed the checks, and the quality flags of that frame come along, so a run of
bad frames is visible on the timeline. ``frame_age_s`` is the age of the frame whose
cues the step carries.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError

#: Default hold time [s]: how long a frame's cues describe the steps after it.
HOLD_S = 15.0

#: Cue columns carried from the latest good frame.
VALUE_COLUMNS = (C.SKY_FRAC, C.GREEN_FRAC, C.BRIGHTNESS_FRAC, C.PEOPLE_N)
#: Status columns carried from the latest frame, good or bad.
STATUS_COLUMNS = (C.FRAME_OK, C.QA_FRAME_BLUR, C.QA_FRAME_OVEREXPOSED, C.QA_FRAME_UNDEREXPOSED,
                  C.QA_FRAME_OBSTRUCTED)
#: Every column :func:`add_frame_cues` adds.
ADDED_COLUMNS = VALUE_COLUMNS + STATUS_COLUMNS + (C.FRAME_AGE_S,)


def _norm(path) -> str:
    s = str(path).replace("\\", "/")
    while s.startswith("./"):
        s = s[2:]
    return s


def _frame_times(timeline: pd.DataFrame, cues: pd.DataFrame, walk: pd.Series | None) -> pd.DataFrame:
    """One row per cue-table frame with the time it takes on the timeline (and its walk)."""
    frames = cues.copy()
    if not isinstance(frames.index, pd.DatetimeIndex):
        if C.TIME in frames.columns:
            frames = frames.set_index(pd.DatetimeIndex(frames[C.TIME]))
        else:
            raise InputError("the cue table has no time index",
                             fix="pass the table returned by walkcomfort.imagery.batch.compute_frame_cues "
                                 "for a frames table, or one with a UTC 'time' index")
    if frames.index.tz is None:
        raise InputError("the cue table's times are naive; tz-aware UTC times are needed",
                         fix="localise the times to UTC")
    t = frames.index.tz_convert("UTC")
    frames = frames.reset_index(drop=True)
    frames["_t"] = t
    if C.FRAME_PATH in timeline.columns and C.FRAME_PATH in frames.columns:
        on_tl = timeline[C.FRAME_PATH].notna()
        anchor = pd.DataFrame({"_key": timeline.loc[on_tl, C.FRAME_PATH].map(_norm).to_numpy(),
                               "_tl": timeline.index[on_tl]})
        frames["_key"] = frames[C.FRAME_PATH].map(_norm)
        if walk is not None:
            anchor["_walk"] = walk[on_tl].to_numpy()
        if walk is not None and C.WALK_ID in frames.columns:
            # a campaign timeline repeats relative paths across walks: match on both
            anchor = anchor.drop_duplicates(["_key", "_walk"], keep="first")
            frames = frames.merge(anchor.rename(columns={"_walk": C.WALK_ID}), on=["_key", C.WALK_ID], how="left")
        else:
            anchor = anchor.drop_duplicates("_key", keep="first")
            frames = frames.merge(anchor, on="_key", how="left")
        frames["_t"] = frames["_tl"].where(frames["_tl"].notna(), frames["_t"])
        frames = frames.drop(columns=["_key", "_tl"])
    return frames


def add_frame_cues(timeline_df: pd.DataFrame, cues_df: pd.DataFrame, hold_s: float = HOLD_S,
                   replace: bool = False) -> pd.DataFrame:
    """Add frame cues to a timeline, carried forward within ``hold_s``.

    Parameters
    ----------
    timeline_df : pandas.DataFrame
        A timeline (UTC ``time`` index; optional ``walk_id`` and ``frame_path`` columns).
        Not modified.
    cues_df : pandas.DataFrame
        Cue table (from :func:`walkcomfort.imagery.batch.compute_frame_cues` or
        :func:`walkcomfort.imagery.labels.read_frame_labels`): UTC ``time`` index,
        ``frame_path`` and any of the cue and status columns. With a ``walk_id``
        column, frames join only steps of their own walk.
    hold_s : float
        How long a frame's cues hold [s]; must be ≥ 0.
    replace : bool
        Allow replacing cue columns the timeline already has (otherwise an error: a
        stage never overwrites a column silently).

    Returns
    -------
    pandas.DataFrame
        A copy of the timeline with ``sky_frac``, ``green_frac``, ``brightness_frac``
        [-], ``people_n`` (float, NaN when unknown), ``frame_ok`` and the
        ``qa_frame_*`` flags (pandas ``boolean``, <NA> beyond the hold), and
        ``frame_age_s`` [s].
    """
    if not isinstance(timeline_df.index, pd.DatetimeIndex) or timeline_df.index.tz is None:
        raise InputError("the timeline needs a tz-aware UTC time index",
                         fix="pass Timeline.data from walkcomfort.session.timeline.build_timeline")
    if not (np.isfinite(hold_s) and hold_s >= 0):
        raise InputError(f"hold_s={hold_s!r}; a number of seconds >= 0 is needed", fix="pass e.g. hold_s=15")
    clash = [c for c in ADDED_COLUMNS if c in timeline_df.columns]
    if clash and not replace:
        raise InputError(f"the timeline already has frame-cue columns {clash}",
                         fix="pass replace=True (CLI: --replace) to recompute them")
    out = timeline_df.drop(columns=clash).copy()
    n = len(out)
    walks = out[C.WALK_ID] if C.WALK_ID in out.columns else None
    frames = _frame_times(out, cues_df, walks)
    # which walk a frame belongs to: its own walk_id column, else the walk of the step it
    # sits on; frames with neither are matched to every walk by time alone
    own = frames[C.WALK_ID] if C.WALK_ID in frames.columns else pd.Series(np.nan, index=frames.index, dtype=object)
    via_step = frames["_walk"] if "_walk" in frames.columns else pd.Series(np.nan, index=frames.index, dtype=object)
    frames["_walk"] = own.where(own.notna(), via_step)

    values = {c: np.full(n, np.nan) for c in VALUE_COLUMNS}
    status = {c: pd.array([pd.NA] * n, dtype="boolean") for c in STATUS_COLUMNS}
    age = np.full(n, np.nan)
    ok_col = frames[C.FRAME_OK].astype(bool) if C.FRAME_OK in frames.columns else pd.Series(True, index=frames.index)
    frames["_ok"] = ok_col.to_numpy()

    t_tl = out.index.tz_convert("UTC").as_unit("ns").asi8
    hold_ns = int(round(hold_s * 1e9))
    if walks is None:
        groups = [(None, np.arange(n))]
    else:
        groups = [(w, np.flatnonzero((walks == w).to_numpy())) for w in pd.unique(walks.dropna())]
        missing = np.flatnonzero(walks.isna().to_numpy())
        if missing.size:
            groups.append((None, missing))
    for w, rows in groups:
        if rows.size == 0:
            continue
        sub = frames if w is None else frames[(frames["_walk"] == w) | frames["_walk"].isna()]
        sub = sub.sort_values("_t", kind="stable")
        ft = pd.DatetimeIndex(sub["_t"]).as_unit("ns").asi8
        tt = t_tl[rows]
        order = np.argsort(tt, kind="stable")
        tt_sorted = tt[order]
        # latest frame of any quality at or before each step
        j_any = np.searchsorted(ft, tt_sorted, side="right") - 1
        good = sub["_ok"].to_numpy()
        ft_good = ft[good]
        j_good = np.searchsorted(ft_good, tt_sorted, side="right") - 1
        tgt = rows[order]
        ok_any = (j_any >= 0)
        ok_any[ok_any] &= (tt_sorted[ok_any] - ft[j_any[ok_any]]) <= hold_ns
        for c in STATUS_COLUMNS:
            if c in sub.columns:
                src = sub[c].astype(bool).to_numpy()
                vals = status[c]
                vals[tgt[ok_any]] = src[j_any[ok_any]]
        ok_good = (j_good >= 0)
        ok_good[ok_good] &= (tt_sorted[ok_good] - ft_good[j_good[ok_good]]) <= hold_ns
        sub_good = sub[good]
        for c in VALUE_COLUMNS:
            if c in sub_good.columns:
                src = pd.to_numeric(sub_good[c], errors="coerce").astype("float64").to_numpy()
                values[c][tgt[ok_good]] = src[j_good[ok_good]]
        age[tgt[ok_good]] = (tt_sorted[ok_good] - ft_good[j_good[ok_good]]) / 1e9
    for c in VALUE_COLUMNS:
        out[c] = values[c]
    for c in STATUS_COLUMNS:
        out[c] = status[c]
    out[C.FRAME_AGE_S] = age
    out.attrs = dict(timeline_df.attrs)
    out.attrs["frame_cues"] = {"hold_s": float(hold_s), "frames": int(len(frames)),
                               "frames_good": int(frames["_ok"].sum())}
    return out
