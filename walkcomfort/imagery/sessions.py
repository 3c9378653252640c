"""The frames of a session folder, read through the session stage, on the reference clock."""

from __future__ import annotations

import os

import pandas as pd

from walkcomfort import columns as C


def session_frames(session, return_fits: bool = False) -> tuple:
    """Every frame of a session with its time moved to the reference (GPS) clock.

    Reads the manifest with :func:`walkcomfort.session.manifest.load_manifest`, each
    frames source with :func:`walkcomfort.session.readers.read_frames`, and corrects
    the camera clock with the offset/drift fitted by
    :func:`walkcomfort.session.clocks.fit_clocks` — the same correction the timeline
    uses, so cue times and timeline times agree.

    Parameters
    ----------
    session : path-like or SessionSpec

    Returns
    -------
    frames : pandas.DataFrame
        UTC ``time`` index (true time), ``frame_path`` (relative to the session folder),
        ``device``, ``source``; sorted by time.
    quarantine : pandas.DataFrame
        Frames the reader set aside (no time, unreadable), ``source, file, row, reason, raw``.
    spec : SessionSpec
    fits : dict of str -> ClockFit
        Only with ``return_fits=True``: the fitted clock of every device.
    """
    from walkcomfort.session.clocks import fit_clocks
    from walkcomfort.session.manifest import SessionSpec, load_manifest
    from walkcomfort.session.readers import quarantine_frame, read_frames

    spec = session if isinstance(session, SessionSpec) else load_manifest(os.fspath(session))
    read, quarantines, frame_times = [], [], {}
    for s in spec.sources_of("frames"):
        df, meta = read_frames(s.abs_path, s, spec)
        read.append((s, df))
        quarantines.append(meta["quarantine"])
        frame_times.update(zip(df[C.FRAME_PATH].tolist(), df.index, strict=False))
    tables = []
    fits = fit_clocks(spec, [s.device for s in spec.sources], frame_times)
    if read:
        for s, df in read:
            fit = fits.get(s.device)
            t = fit.to_true(df.index) if fit is not None else df.index
            out = pd.DataFrame({C.FRAME_PATH: df[C.FRAME_PATH].astype(object).to_numpy(),
                                "device": s.device, "source": s.name}, index=pd.DatetimeIndex(t, name=C.TIME))
            tables.append(out)
    if tables:
        frames = pd.concat(tables).sort_index(kind="stable")
    else:
        frames = pd.DataFrame({C.FRAME_PATH: pd.Series([], dtype=object), "device": pd.Series([], dtype=object),
                               "source": pd.Series([], dtype=object)},
                              index=pd.DatetimeIndex([], tz="UTC", name=C.TIME))
    q = pd.concat([x for x in quarantines if len(x)], ignore_index=True) if any(len(x) for x in quarantines) \
        else quarantine_frame()
    return (frames, q, spec, fits) if return_fits else (frames, q, spec)
