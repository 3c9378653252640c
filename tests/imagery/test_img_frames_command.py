"""`walkcomfort frames`: cues for a session, onto the ingested timeline, into the model's features."""

from __future__ import annotations

import shutil

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.cli import main
from walkcomfort.imagery.commands import FRAME_CUES_FILE, FRAME_QUARANTINE_FILE


@pytest.fixture
def session(tmp_path, repo_root):
    dst = tmp_path / "walk"
    shutil.copytree(repo_root / "tests" / "fixtures" / "sessions" / "walk_ok", dst)
    return dst


def test_frames_after_ingest_adds_cues_that_reach_the_features(tmp_path, session, capsys):
    from walkcomfort.model.features import build_features
    from walkcomfort.session.timeline import read_timeline

    out = tmp_path / "out"
    assert main(["ingest", str(session), "-o", str(out)]) == 0
    assert main(["frames", str(session), "-o", str(out), "--workers", "1"]) == 0
    text = capsys.readouterr().out
    assert "10 frames = 10 analysed + 0 quarantined" in text and "added frame cues" in text
    walk = out / "fixture-p01-am"
    cues = pd.read_parquet(walk / FRAME_CUES_FILE)
    assert len(cues) == 10 and cues.index.tz is not None
    assert (walk / FRAME_QUARANTINE_FILE).is_file()

    tl = read_timeline(walk)
    assert tl.attrs["session"]["walk_id"] == "fixture-p01-am"
    on_frame = tl[C.FRAME_PATH].notna()
    assert on_frame.sum() == 10
    np.testing.assert_allclose(tl.loc[on_frame, C.SKY_FRAC].to_numpy(),
                               cues.set_index(C.FRAME_PATH).loc[tl.loc[on_frame, C.FRAME_PATH], C.SKY_FRAC].to_numpy())
    assert tl[C.FRAME_AGE_S].max() <= 15.0
    feats = build_features(tl)
    assert feats["sky_frac_1min"].notna().any()

    # a second run refuses, before any work, to overwrite the columns silently ...
    assert main(["frames", str(session), "-o", str(out), "--workers", "1"]) == 2
    captured = capsys.readouterr()
    assert "--replace" in captured.err and captured.err.count("\n") == 1 and "analysed" not in captured.out
    # ... and with --replace it recomputes from the cache
    assert main(["frames", str(session), "-o", str(out), "--workers", "1", "--replace", "--hold", "5"]) == 0
    assert "10 from cache, 0 computed" in capsys.readouterr().out
    assert read_timeline(walk)[C.FRAME_AGE_S].max() <= 5.0


def test_frames_with_labels_and_without_timeline(tmp_path, session, capsys):
    (session / "frame_labels.csv").write_text("frame,sky,vegetation,people\nIMG_0003.jpg,0.1,0.6,4\n"
                                              "IMG_0099.jpg,0.1,0.1,0\n", encoding="utf-8")
    out = tmp_path / "out"
    assert main(["frames", str(session), "-o", str(out), "--no-people", "--no-cache",
                 "--labels", "frame_labels.csv"]) == 0
    text = capsys.readouterr().out
    assert "labels: 2 rows = 1 used + 1 quarantined" in text and "no timeline there yet" in text
    cues = pd.read_parquet(out / "fixture-p01-am" / FRAME_CUES_FILE).set_index(C.FRAME_PATH)
    assert cues.loc["camera/IMG_0003.jpg", C.GREEN_FRAC] == 0.6
    assert cues.loc["camera/IMG_0003.jpg", C.PEOPLE_N] == 4
    q = pd.read_csv(out / "fixture-p01-am" / FRAME_QUARANTINE_FILE)
    assert q["reason"].str.contains("not in the session").any()
    assert not (out / ".cache").exists()


@pytest.mark.slow
def test_cues_follow_the_demo_frames_drawn_shares(demo_dir):
    # the demo simulator draws each frame and records the pixel shares it drew
    # (demo_walks/truth/frames.csv, invented data): the cues must follow them
    from walkcomfort.imagery.batch import compute_frame_cues
    from walkcomfort.imagery.sessions import session_frames

    truth_path = demo_dir / "truth" / "frames.csv"
    if not truth_path.is_file():
        pytest.skip("demo_walks not generated")
    truth = pd.read_csv(truth_path)
    session = sorted(truth["session"].unique())[0]
    frames, _, spec = session_frames(demo_dir / "sessions" / session)
    cues, meta = compute_frame_cues(frames, spec.session_dir, workers=1)
    t = truth[truth["session"] == session].set_index("file").add_suffix("_true")
    j = cues.set_index(C.FRAME_PATH).join(t, how="inner")
    assert len(j) == len(cues) > 10
    for col, mae in ((C.SKY_FRAC, 0.05), (C.GREEN_FRAC, 0.02)):
        a, b = j[col].astype(float), j[col + "_true"].astype(float)
        assert (a - b).abs().mean() < mae, col
        assert np.corrcoef(a, b)[0, 1] > 0.9, col
    # people: the HOG detector misses many of the small drawn walkers, but its count rises with theirs
    a, b = j[C.PEOPLE_N].astype(float), j[C.PEOPLE_N + "_true"].astype(float)
    assert np.corrcoef(a, b)[0, 1] > 0.2 and a.sum() <= 1.5 * b.sum()


def test_frames_on_a_session_whose_camera_folder_is_empty_is_a_one_line_error(tmp_path, session, capsys):
    # an empty frames folder once wrote an empty cue table and exited 0; now it is an InputError
    manifest = (session / "session.toml").read_text()
    assert 'kind = "frames"' in manifest
    import tomllib

    folder = next(s["path"] for s in tomllib.loads(manifest)["source"] if s["kind"] == "frames")
    shutil.rmtree(session / folder)
    (session / folder).mkdir()
    code = main(["frames", str(session), "-o", str(tmp_path / "out"), "--workers", "1"])
    assert code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no camera frames found" in err[0] and "Fix:" in err[0]
    assert not (tmp_path / "out").exists()
