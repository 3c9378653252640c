"""Fuzzing the CSV readers (hypothesis): any text gives an InputError or rows that reconcile, never a crash."""

from __future__ import annotations

import re
import shutil
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from walkcomfort.errors import InputError
from walkcomfort.session.manifest import load_manifest
from walkcomfort.session.readers import read_light, read_noise, read_votes, read_weather

# a few seconds each on a loaded machine: marked slow (they still run in CI)
pytestmark = pytest.mark.slow

SESSIONS = Path(__file__).resolve().parents[1] / "fixtures" / "sessions"
FUZZ = settings(max_examples=80, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])


@pytest.fixture(scope="module")
def session():
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp) / "s"
        shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
        text = (d / "session.toml").read_text()
        text += ('\n[[source]]\nkind = "noise"\npath = "noise.csv"\n\n[[source]]\nkind = "light"\npath = "light.csv"\n'
                 '\n[[source]]\nkind = "votes"\npath = "votes.csv"\n')
        for name in ("noise.csv", "light.csv", "votes.csv"):
            (d / name).write_text("time\n")
        (d / "session.toml").write_text(text)
        yield d, load_manifest(d)


times = st.one_of(
    st.integers(0, 3600).map(lambda s: f"2026-07-14 10:{s // 60 % 60:02d}:{s % 60:02d}"),
    st.integers(0, 3600).map(lambda s: f"2026-07-14T08:{s // 60 % 60:02d}:{s % 60:02d}Z"),
    st.sampled_from(["", "NaN", "2026-02-30 10:00:00", "2026-03-29 02:30:00", "2026-10-25 02:30:00", "yesterday"]),
    st.text(max_size=12),
)
numbers = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers(-500, 500).map(str),
                    st.sampled_from(["", "NA", "-", "1,5", "1e999", "abc"]), st.text(max_size=6))
labels = st.one_of(st.sampled_from(["comfortable", "Neutral", "UNCOMFORTABLE", "", "meh"]), st.text(max_size=8))


def _row(fields):
    out = []
    for f in fields:
        f = f.replace("\r", " ").replace("\n", " ").replace("\x85", " ").replace("\u2028", " ").replace("\u2029", " ")
        f = f.replace(chr(34), "")   # quotes only as whole-field quoting (a quoted field may span lines)
        out.append(f'"{f}"' if ("," in f and np.random.default_rng(len(f)).random() < 0.5) else f)
    return ",".join(out)


def _check(reader, d, spec, name, text):
    path = d / name
    path.write_text(text, encoding="utf-8")
    src = [s for s in spec.sources if s.path == name][0]
    try:
        df, meta = reader(path, src, spec)
    except InputError as exc:
        msg = str(exc)
        assert "\n" not in msg and msg
        return None
    assert meta["rows_read"] == meta["rows_used"] + meta["rows_quarantined"]
    assert meta["rows_used"] == len(df)
    assert df.index.is_monotonic_increasing and df.index.is_unique
    assert str(df.index.tz) == "UTC"
    # only CR/LF end a line: U+2028, NEL, form feed... are text inside a field
    lines = [ln for ln in re.split(r"\r\n|\n|\r", text)[1:] if ln.strip() and not ln.strip().startswith("#")]
    assert meta["rows_read"] == len(lines)
    return df


@FUZZ
@given(rows=st.lists(st.tuples(times, numbers, numbers, numbers), max_size=25),
       junk=st.lists(st.text(max_size=30), max_size=4))
def test_weather_reader_fuzz(session, rows, junk):
    d, spec = session
    body = [_row(r) for r in rows] + list(junk)
    df = _check(read_weather, d, spec, "weather.csv", "time,t_air,rh,wind\n" + "\n".join(body) + "\n")
    if df is not None and len(df):
        assert np.nanmin(df["t_air_c"].to_numpy(float), initial=0) >= -50
        assert np.nanmax(df["rh_pct"].to_numpy(float), initial=0) <= 100


@FUZZ
@given(rows=st.lists(st.tuples(times, numbers), max_size=25))
def test_noise_and_light_reader_fuzz(session, rows):
    d, spec = session
    _check(read_noise, d, spec, "noise.csv", "time,laeq\n" + "\n".join(_row(r) for r in rows) + "\n")
    _check(read_light, d, spec, "light.csv", "time,illum\n" + "\n".join(_row(r) for r in rows) + "\n")


@FUZZ
@given(rows=st.lists(st.tuples(times, labels, numbers, st.text(max_size=10)), max_size=20))
def test_votes_reader_fuzz(session, rows):
    d, spec = session
    df = _check(read_votes, d, spec, "votes.csv", "time,comfort,tsv,note\n" + "\n".join(_row(r) for r in rows) + "\n")
    if df is not None and len(df):
        assert set(df["vote_comfort"].dropna()) <= {"comfortable", "neutral", "uncomfortable"}
        tsv = df["vote_tsv"].dropna()
        assert ((tsv >= -3) & (tsv <= 3) & (tsv == tsv.round())).all()


@pytest.fixture(scope="module")
def mini():
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp) / "m"
        shutil.copytree(SESSIONS / "broken" / "gpx10_ok", d)
        yield d


@settings(FUZZ, max_examples=20)
@given(dups=st.sets(st.integers(1, 28), max_size=5), garbage=st.sets(st.integers(1, 28), max_size=4),
       hot=st.sets(st.integers(1, 28), max_size=4), gap=st.one_of(st.none(), st.integers(3, 20)),
       no_time=st.sets(st.integers(1, 58), max_size=3))
def test_planted_imperfections_are_found_exactly(mini, dups, garbage, hot, gap, no_time):
    """Plant duplicates, garbage lines, out-of-range rows, a gap and timeless GPX points; QA counts each exactly."""
    import re

    d = mini
    base = (SESSIONS / "broken" / "gpx10_ok" / "weather.csv").read_text().splitlines()
    header, rows = base[0], base[1:]
    hot = hot - dups
    out = [header]
    for k, line in enumerate(rows):
        if gap is not None and gap <= k < gap + 8:      # 8 missing rows of 2 s: a 18 s interval > 10 s
            continue
        f = line.split(",")
        if k in hot:
            f[1] = "75.0"                                  # above 60 °C: out of range
        out.append(",".join(f))
        if k in dups and not (gap is not None and gap <= k < gap + 8):
            out.append(",".join(f[:1] + [str(float(f[1]) + 0.1)] + f[2:]))   # same time, other value
        if k in garbage:
            out.append("#### garbage ;;; " + "x" * k if k % 2 else "\x00garbage")
    (d / "weather.csv").write_text("\n".join(out) + "\n")
    gpx = (SESSIONS / "broken" / "gpx10_ok" / "track.gpx").read_text()
    pts = gpx.split("<trkpt")
    for i in no_time:
        pts[i + 1] = re.sub(r"<time>.*?</time>", "", pts[i + 1])
    (d / "track.gpx").write_text("<trkpt".join(pts))
    from walkcomfort.session.timeline import build_timeline

    tl = build_timeline(d)
    s = tl.qa["summary"]
    kept = {k for k in range(len(rows)) if gap is None or not gap <= k < gap + 8}
    assert s["reconciles"]
    assert s["duplicate_rows"] == len(dups & kept)
    assert s["out_of_range_rows"] == len(hot & kept)
    # garbage lines starting with '#' are comments (not rows); the others are bad lines
    assert s["bad_lines"] == sum(1 for k in garbage & kept if not k % 2)
    assert s["points_without_time"] == len(no_time)
    assert tl.qa["sources"]["weather"]["gaps"] == (0 if gap is None else 1)
    assert s["gps_jumps"] == 0 and s["clock_corrections"] == 0
