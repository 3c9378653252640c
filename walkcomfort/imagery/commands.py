"""``walkcomfort frames`` (cues per frame, onto the timeline) and ``walkcomfort share`` (a shareable copy)."""

from __future__ import annotations

from pathlib import Path

import click

from walkcomfort.errors import InputError

FRAME_CUES_FILE = "frame_cues.parquet"
FRAME_QUARANTINE_FILE = "frame_quarantine.csv"


@click.command()
@click.argument("session_dirs", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--out", "-o", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Output folder; each walk goes to OUT/<walk_id>/ (where `walkcomfort ingest` writes).")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes [default: the usable cores].")
@click.option("--cache", "cache_dir", type=click.Path(path_type=Path), default=None,
              help="Cache folder (results keyed by frame digest) [default: OUT/.cache/frames].")
@click.option("--no-cache", is_flag=True, help="Do not read or write the cache.")
@click.option("--no-people", is_flag=True, help="Skip the people detector (the slowest part).")
@click.option("--labels", "labels_name", type=str, default=None,
              help="Per-frame labels CSV to merge (a path, or a name inside each session folder).")
@click.option("--labels-scale", type=click.Choice(["fraction", "percent"]), default="fraction", show_default=True,
              help="How shares are written in the labels CSV.")
@click.option("--prefer", type=click.Choice(["imported", "computed"]), default="imported", show_default=True,
              help="Which value wins where labels and built-in cues both give one.")
@click.option("--hold", "hold_s", type=click.FloatRange(min=0), default=None,
              help="How long a frame's cues hold on the timeline [s] [default: 15].")
@click.option("--replace", is_flag=True, help="Replace frame-cue columns a timeline already has.")
def frames(session_dirs, out_dir, workers, cache_dir, no_cache, no_people, labels_name, labels_scale, prefer,
           hold_s, replace):
    """Compute camera-frame cues (sky, greenery, brightness, people, quality) for session folder(s).

    Writes OUT/<walk_id>/frame_cues.parquet and frame_quarantine.csv; when
    OUT/<walk_id>/timeline.parquet exists (from `walkcomfort ingest`), adds the cues
    to it, carried forward within the hold time.
    """
    from walkcomfort.imagery.attach import HOLD_S
    from walkcomfort.imagery.batch import default_workers, make_pool
    from walkcomfort.session.commands import find_sessions

    hold = HOLD_S if hold_s is None else float(hold_s)
    sessions = find_sessions(session_dirs)
    cache = None if no_cache else (cache_dir if cache_dir is not None else Path(out_dir) / ".cache" / "frames")
    n_workers = default_workers() if workers is None else workers
    pool = make_pool(n_workers) if n_workers > 1 else None   # one pool for every session
    try:
        _frames_sessions(sessions, out_dir, pool, n_workers, cache, no_people, labels_name, labels_scale, prefer,
                         hold, replace)
    finally:
        if pool is not None:
            pool.shutdown()


def _frames_sessions(sessions, out_dir, pool, workers, cache, no_people, labels_name, labels_scale, prefer,
                     hold, replace):
    import pandas as pd

    from walkcomfort import _io
    from walkcomfort.imagery.attach import ADDED_COLUMNS, add_frame_cues
    from walkcomfort.imagery.batch import compute_frame_cues
    from walkcomfort.imagery.labels import combine_cues, read_frame_labels
    from walkcomfort.imagery.sessions import session_frames
    from walkcomfort.session.timeline import TIMELINE_FILE, read_timeline

    for d in sessions:
        table, reader_q, spec = session_frames(d)
        if len(table) == 0 and len(reader_q) == 0:   # nothing read and nothing set aside: say so
            folders = [str(s.path) for s in spec.sources_of("frames")]
            raise InputError(f"no camera frames found (frames folders: {folders or 'none in the manifest'})",
                             where=spec.session_dir,
                             fix="put the frame images in the folder of the 'frames' source of session.toml, "
                                 "or leave this session out of `walkcomfort frames`")
        tl_path = Path(out_dir) / spec.id / TIMELINE_FILE
        if tl_path.is_file() and not replace:
            import pyarrow.parquet as pq

            clash = [c for c in ADDED_COLUMNS if c in pq.read_schema(tl_path).names]
            if clash:   # say so before the work, not after it
                raise InputError(f"the timeline already has frame-cue columns {clash}", where=tl_path,
                                 fix="pass --replace to recompute them")
        cues, meta = compute_frame_cues(table, spec.session_dir, detect_people=not no_people, workers=workers,
                                        cache_dir=cache, pool=pool)
        label_meta = None
        if labels_name:
            lp = Path(labels_name)
            if not lp.is_absolute() and (spec.session_dir / lp).is_file():
                lp = spec.session_dir / lp
            elif len(sessions) > 1:
                raise InputError(f"--labels '{labels_name}' is not a file inside session '{d}'",
                                 fix="with several sessions, give a name that each session folder holds")
            labels, label_meta = read_frame_labels(lp, table, scale=labels_scale, tz=spec.timezone)
            cues = combine_cues(cues, labels, prefer=prefer)
        walk = Path(out_dir) / spec.id
        parts = [reader_q, meta["quarantine"]] + ([label_meta["quarantine"]] if label_meta else [])
        nonempty = [q for q in parts if len(q)]
        quarantine = pd.concat(nonempty, ignore_index=True) if nonempty else meta["quarantine"]
        prov = _io.provenance(parameters={"analysis": meta["parameters"], "hold_s": hold,
                                          "labels": label_meta["columns"] if label_meta else None,
                                          "prefer": prefer if labels_name else None})
        prov["walk_id"] = spec.id
        _io.write_parquet(walk / FRAME_CUES_FILE, cues, {"provenance": prov, "counts": meta["counts"]})
        _io.write_csv(walk / FRAME_QUARANTINE_FILE, quarantine, index=False)
        c = meta["counts"]
        click.echo(f"{spec.id}: {c['read']} frames = {c['used']} analysed + {c['quarantined']} quarantined; "
                   f"{c['frame_ok']} passed the quality checks; {c['cache_hits']} from cache, "
                   f"{c['computed']} computed" + (f"; reader set aside {len(reader_q)}" if len(reader_q) else ""))
        if label_meta:
            lc = label_meta["counts"]
            click.echo(f"  labels: {lc['read']} rows = {lc['used']} used + {lc['quarantined']} quarantined")
        if tl_path.is_file():
            tl = read_timeline(tl_path)
            meta_tl = _io.read_parquet_metadata(tl_path)
            out = add_frame_cues(tl, cues, hold_s=hold, replace=replace)
            info = out.attrs.get("frame_cues", {})
            out.attrs = {}
            meta_tl["frame_cues"] = {"hold_s": hold, "cues_file": FRAME_CUES_FILE, **info}
            _io.write_parquet(tl_path, out, meta_tl)
            click.echo(f"  added frame cues to {tl_path}")
        else:
            click.echo(f"  wrote {walk / FRAME_CUES_FILE} (no timeline there yet: run `walkcomfort ingest` "
                       f"with the same -o, then this command again to attach the cues)")


@click.command()
@click.argument("session_dirs", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--out", "-o", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Output folder; each shared session goes to OUT/<session pseudonym>/.")
@click.option("--secret-file", type=click.Path(path_type=Path), default=None,
              help="File holding the project's pseudonym secret [default: $WALKCOMFORT_SHARE_SECRET].")
@click.option("--trim-radius", "radius_m", type=click.FloatRange(min=0), default=200.0, show_default=True,
              help="Remove track points and frames within this distance of the start and end [m].")
@click.option("--keep-notes", is_flag=True, help="Keep free-text notes (votes, sync events); default: emptied. "
              "Notes holding an e-mail address, phone number or name are refused unless masked or reviewed.")
@click.option("--mask-notes", is_flag=True, help="With --keep-notes: replace e-mail addresses, phone numbers and "
              "names in notes by [e-mail], [phone], [name].")
@click.option("--notes-reviewed", is_flag=True, help="With --keep-notes: the notes were checked by hand; keep them "
              "as written.")
@click.option("--keep-extensions", is_flag=True,
              help="Keep GPX point extensions (heart rate is health data); default: removed.")
@click.option("--plates", is_flag=True, help="Also blur licence-plate-like regions.")
@click.option("--no-blur", is_flag=True, help="Do not blur faces (only for copies that stay within the team).")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Worker processes for the face blurring [default: the usable cores].")
def share(session_dirs, out_dir, secret_file, radius_m, keep_notes, mask_notes, notes_reviewed, keep_extensions,
          plates, no_blur, workers):
    """Write a shareable copy of session folder(s): pseudonyms, track ends trimmed, faces blurred.

    The raw session is never modified. Each copy holds share_record.json, the list of
    what was removed or changed. Review the frames before they leave the team.
    """
    from walkcomfort.imagery.batch import default_workers, make_pool
    from walkcomfort.imagery.privacy import load_secret
    from walkcomfort.imagery.share import share_session
    from walkcomfort.session.commands import find_sessions

    if (mask_notes or notes_reviewed) and not keep_notes:
        raise InputError("--mask-notes / --notes-reviewed apply to kept notes only", where="--keep-notes",
                         fix="add --keep-notes, or leave them out (notes are then emptied)")
    if mask_notes and notes_reviewed:
        raise InputError("--mask-notes and --notes-reviewed were both given", where="--mask-notes",
                         fix="give one of them")
    note_policy = "mask" if mask_notes else "reviewed" if notes_reviewed else "refuse"
    secret = load_secret(secret_file)
    sessions = find_sessions(session_dirs)
    n_workers = default_workers() if workers is None else workers
    pool = make_pool(n_workers) if n_workers > 1 else None
    try:
        for d in sessions:
            folder, rec = share_session(d, out_dir, secret, radius_m=radius_m, keep_notes=keep_notes,
                                        note_policy=note_policy, keep_extensions=keep_extensions, blur_faces=not no_blur, plates=plates,
                                        pool=pool)
            fr = rec["frames"]
            trimmed = sum(v.get("points_removed_near_ends", 0) for v in rec["files"].values()
                          if v.get("kind") == "gps")
            click.echo(f"{d} -> {folder}: {trimmed} track points trimmed, {fr['copied']} frames shared "
                       f"({fr['removed_near_track_ends']['count']} near the ends and "
                       f"{fr['removed_position_unknown']['count']} without a position left out), "
                       f"{fr['faces_blurred']} faces blurred in {len(fr['frames_with_faces'])} frames; "
                       f"record: {folder / 'share_record.json'}")
    finally:
        if pool is not None:
            pool.shutdown()
    click.echo("Before release: look through the shared frames (blurring misses some faces) and check the "
               "study's ethics approval.")
