"""Pseudonyms, track trimming, and the shareable copy of a session (`walkcomfort share`)."""

from __future__ import annotations

import hashlib
import hmac
import json
import shutil
import tomllib

import gpxpy
import numpy as np
import pytest
from PIL import Image
from skimage import data

from walkcomfort import _io
from walkcomfort.cli import main
from walkcomfort.errors import InputError
from walkcomfort.imagery import faces, privacy
from walkcomfort.imagery.share import RECORD_NAME, share_session

SECRET = b"0123456789abcdef-test-secret-not-for-real-use"


# --- pseudonyms and distances --------------------------------------------------------------


def test_pseudonym_is_the_documented_keyed_hash():
    # from the definition in walkcomfort.imagery.privacy: HMAC-SHA256 (RFC 2104) over
    # kind NUL value, first 10 hex digits upper-case, with a kind prefix
    expect = "P-" + hmac.new(SECRET, b"participant\x00P01", hashlib.sha256).hexdigest()[:10].upper()
    assert privacy.pseudonym("P01", SECRET) == expect
    assert privacy.pseudonym(" P01 ", SECRET) == expect
    assert privacy.pseudonym("P01", SECRET, "session").startswith("S-")
    assert privacy.pseudonym("P01", SECRET, "session")[2:] != expect[2:]
    assert privacy.pseudonym("P01", SECRET[::-1]) != expect
    assert privacy.pseudonym("P02", SECRET) != expect
    with pytest.raises(InputError):
        privacy.pseudonym("P01", b"short")


def test_load_secret(tmp_path, monkeypatch):
    f = tmp_path / "project.secret"
    f.write_bytes(SECRET + b"\n")
    assert privacy.load_secret(f) == SECRET
    monkeypatch.setenv(privacy.SECRET_ENV, SECRET.decode())
    assert privacy.load_secret() == SECRET
    monkeypatch.delenv(privacy.SECRET_ENV)
    with pytest.raises(InputError, match="no pseudonym secret"):
        privacy.load_secret()
    f.write_text("tooshort")
    with pytest.raises(InputError, match="at least 16"):
        privacy.load_secret(f)


def test_great_circle_from_definition():
    # one degree of latitude on a sphere of radius R is R·π/180 = 111 195.08 m (R = 6 371 008.8 m)
    assert privacy.great_circle_m(10.0, 5.0, 11.0, 5.0) == pytest.approx(111_195.08, abs=0.01)
    # a quarter of a great circle: from the pole to the equator, R·π/2
    assert privacy.great_circle_m(90.0, 0.0, 0.0, 40.0) == pytest.approx(privacy.EARTH_RADIUS_M * np.pi / 2)


def test_trim_mask_removes_both_ends_and_returns_to_home():
    # a walk 1 km north in 10 m steps, back south past the start (the front door) to
    # 100 m beyond it, then 600 m east to the end (near the equator: degrees of lat and
    # lon are about the same length there)
    step = 10.0 / 111_195.08
    lat = np.concatenate([np.arange(0, 101), np.arange(99, -11, -1), np.full(60, -10)]) * step
    lon = np.concatenate([np.zeros(101), np.zeros(110), np.arange(1, 61)]) * step
    drop = privacy.trim_mask(lat, lon, 200.0)
    d_start = privacy.great_circle_m(lat[0], lon[0], lat, lon)
    d_end = privacy.great_circle_m(lat[-1], lon[-1], lat, lon)
    np.testing.assert_array_equal(drop, (d_start <= 200.0) | (d_end <= 200.0))
    assert drop[:20].all() and not drop[25:180].any()      # start area on the way out
    assert drop[191:211].all()                              # passing the front door again
    assert drop[-15:].all() and not drop[-35:-25].any()     # the end area
    # NaN positions are removed too; radius 0 removes only the points *at* the start or
    # the end: the first, the last, the return through the start (index 200), the NaN
    lat2 = lat.copy()
    lat2[50] = np.nan
    assert np.flatnonzero(privacy.trim_mask(lat2, lon, 0.0)).tolist() == [0, 50, 200, len(lat) - 1]
    with pytest.raises(InputError):
        privacy.trim_mask(lat, lon, -5)


def test_toml_round_trip(repo_root):
    manifest = repo_root / "tests" / "fixtures" / "sessions" / "walk_ok" / "session.toml"
    d = tomllib.loads(manifest.read_text(encoding="utf-8"))
    assert tomllib.loads(privacy.to_toml(d)) == d
    tricky = {"a": {"b c": "x\"y\n", "n": float("inf"), "l": [1, 2.5, "z"]}, "arr": [{"k": 1, "sub": {"v": True}}]}
    assert tomllib.loads(privacy.to_toml(tricky)) == tricky


# --- the shareable copy ------------------------------------------------------------------------


def _tree_digests(folder):
    return {p.relative_to(folder).as_posix(): _io.file_digest(p) for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture
def session_with_face(tmp_path, repo_root):
    """The fixture walk with one frame replaced by a photograph of a face, and a personal note."""
    src = repo_root / "tests" / "fixtures" / "sessions" / "walk_ok"
    dst = tmp_path / "raw" / "walk"
    shutil.copytree(src, dst)
    frame = dst / "camera" / "IMG_0005.jpg"
    with Image.open(frame) as im:
        exif = im.getexif()
        exif_bytes = exif.tobytes()
    ifd = exif.get_ifd(0x8769)
    ifd[0x927C] = b"maker-note-with-serial-1234"   # a maker note, which must not survive
    exif_bytes = exif.tobytes()
    Image.fromarray(data.astronaut()).save(frame, quality=92, exif=exif_bytes)
    votes = dst / "votes.csv"
    votes.write_text(votes.read_text(encoding="utf-8").replace("shady start", "met my neighbour Ana"),
                     encoding="utf-8")
    return dst


def test_share_writes_a_clean_copy_that_passes_check(tmp_path, session_with_face, capsys):
    raw_before = _tree_digests(session_with_face)
    out = tmp_path / "shared"
    folder, record = share_session(session_with_face, out, SECRET, radius_m=50.0)
    # the raw session is untouched
    assert _tree_digests(session_with_face) == raw_before
    # the copy passes the session stage's own check
    capsys.readouterr()
    assert main(["check", str(folder)]) == 0
    assert "check passed" in capsys.readouterr().out

    manifest = tomllib.loads((folder / "session.toml").read_text(encoding="utf-8"))
    assert manifest["session"]["participant"] == privacy.pseudonym("P01", SECRET)
    assert manifest["session"]["id"] == folder.name == privacy.pseudonym("fixture-p01-am", SECRET, "session")
    assert all("note" not in ev for ev in manifest.get("sync", []))

    # the track ends are trimmed: no point within 50 m of the raw start or end
    raw = gpxpy.parse((session_with_face / "gps" / "track.gpx").read_text(encoding="utf-8"))
    raw_pts = [p for t in raw.tracks for s in t.segments for p in s.points if p.time is not None]
    shared = gpxpy.parse((folder / "gps" / "track.gpx").read_text(encoding="utf-8"))
    pts = [p for t in shared.tracks for s in t.segments for p in s.points]
    lat = np.array([p.latitude for p in pts])
    lon = np.array([p.longitude for p in pts])
    for end in (raw_pts[0], raw_pts[-1]):
        assert privacy.great_circle_m(end.latitude, end.longitude, lat, lon).min() > 50.0
    entry = record["files"]["gps/track.gpx"]
    assert entry["points_kept"] == len(pts)
    assert entry["points_kept"] + entry["points_removed_near_ends"] + entry["points_removed_without_time"] == \
        entry["points_read"]
    assert shared.creator == "walkcomfort share" and not shared.waypoints
    # heart rate (health data) is not shared unless asked for
    assert "hr>" not in (folder / "gps" / "track.gpx").read_text(encoding="utf-8")
    assert entry["point_extensions_removed"] == entry["points_kept"]

    # the face is blurred, the frame keeps only its time tags
    fr = record["frames"]
    assert fr["frames_with_faces"] == {"camera/IMG_0005.jpg": 1}
    shared_frame = folder / "camera" / "IMG_0005.jpg"
    img = np.asarray(Image.open(shared_frame).convert("RGB"))
    assert len(faces.detect_faces(img)) == 0
    with Image.open(shared_frame) as im:
        exif = im.getexif()
        ifd = exif.get_ifd(0x8769)
    assert set(ifd) <= {0x9003, 0x9291, 0x9011} and 0x9003 in ifd
    assert set(exif) <= {0x8769}
    # frames near the ends are not shared; the record counts them (names and exact times would tell the
    # trimmed ends, so it gives neither: a span rounded outward to the hour); the counts add up
    assert fr["copied"] + fr["removed_near_track_ends"]["count"] + fr["removed_position_unknown"]["count"] + \
        fr["not_copied_untimed_or_unreadable"] == fr["frames_read"]
    raw_frames = {p.name for p in (session_with_face / "camera").glob("*.jpg")}
    shared_frames = {p.name for p in (folder / "camera").glob("*.jpg")}
    assert fr["removed_near_track_ends"]["count"] >= 1 and len(shared_frames) == fr["copied"]
    record_text = (folder / RECORD_NAME).read_text(encoding="utf-8")
    assert not [n for n in raw_frames - shared_frames if n in record_text]
    for t in fr["removed_near_track_ends"]["span_utc"]:
        assert t.endswith(":00:00+00:00")
    # notes are emptied, the rest of the votes kept
    votes = (folder / "votes.csv").read_text(encoding="utf-8")
    assert "Ana" not in votes and "neighbour" not in votes
    assert record["files"]["votes.csv"]["notes_emptied"] == 2
    # non-frame files of the camera folder are not copied
    assert not (folder / "camera" / "README.txt").exists() and record["not_copied"]["files"] >= 1
    # the record lists the digests of what was written
    assert set(record["outputs"]) == {p for p in _tree_digests(folder) if p != RECORD_NAME}
    assert (folder / RECORD_NAME).is_file()


def test_share_refuses_to_write_inside_the_session_or_over_a_copy(tmp_path, session_with_face):
    with pytest.raises(InputError, match="inside the session folder"):
        share_session(session_with_face, session_with_face / "shared", SECRET)
    folder, _ = share_session(session_with_face, tmp_path / "out", SECRET, radius_m=50.0, blur_faces=False,
                              keep_extensions=True)
    assert "hr>" in (folder / "gps" / "track.gpx").read_text(encoding="utf-8")
    with pytest.raises(InputError, match="already exists"):
        share_session(session_with_face, tmp_path / "out", SECRET, radius_m=50.0, blur_faces=False)
    with pytest.raises(InputError, match="every point"):
        share_session(session_with_face, tmp_path / "out2", SECRET, radius_m=100_000.0, blur_faces=False)
    assert not any(p.name.endswith(".partial") for p in (tmp_path / "out2").iterdir())


def test_share_command(tmp_path, session_with_face, capsys):
    secret = tmp_path / "project.secret"
    secret.write_bytes(SECRET)
    out = tmp_path / "shared"
    code = main(["share", str(session_with_face), "-o", str(out), "--secret-file", str(secret),
                 "--trim-radius", "50", "--no-blur", "--workers", "1"])
    assert code == 0
    text = capsys.readouterr().out
    assert "track points trimmed" in text and "ethics approval" in text
    code = main(["share", str(session_with_face), "-o", str(tmp_path / "x")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "secret" in err


def test_share_csv_track_and_a_sync_frame_near_the_start(tmp_path, make_template_session):
    # a session from the field-protocol templates with a CSV track; its start sync photo
    # (IMG_0001, the GPS clock) lies within the trimming radius, so it is not shared and its
    # sync event must be re-written as a clock reading — the camera's clock fit is unchanged
    from walkcomfort.session.timeline import build_timeline

    raw = make_template_session(tmp_path / "raw", gps_csv=True)
    folder, record = share_session(raw, tmp_path / "shared", SECRET, radius_m=200.0, blur_faces=False)
    assert record["frames"]["removed_near_track_ends"]["count"] >= 1
    assert not (folder / "camera" / "IMG_0001.jpg").exists() and "IMG_0001" not in json.dumps(record)
    assert record["manifest"]["sync_frames_rewritten_as_times"] == 1
    manifest = tomllib.loads((folder / "session.toml").read_text(encoding="utf-8"))
    cam = [ev for ev in manifest["sync"] if ev["device"] == "cam1"][0]
    assert "frame" not in cam and "device_time" in cam
    text = (folder / "gps" / "track.csv").read_text(encoding="utf-8")
    assert "serial" not in text and text.startswith("time,lat,lon,elev\n")
    entry = record["files"]["gps/track.csv"]
    assert entry["comment_or_preamble_lines_removed"] == 1
    before, after = build_timeline(raw), build_timeline(folder)
    assert after.qa["clocks"]["cam1"]["offset_s"] == pytest.approx(before.qa["clocks"]["cam1"]["offset_s"])
    assert len(after.quarantine) == 0 or set(after.quarantine["reason"]) <= {"outside_track_span",
                                                                            "outside_walk_window"}
    # trimmed: the shared track starts and ends more than 200 m from the raw ends
    lat0, lon0 = before.data["lat"].iloc[0], before.data["lon"].iloc[0]
    lat1, lon1 = before.data["lat"].iloc[-1], before.data["lon"].iloc[-1]
    d = np.minimum(privacy.great_circle_m(lat0, lon0, after.data["lat"], after.data["lon"]),
                   privacy.great_circle_m(lat1, lon1, after.data["lat"], after.data["lon"]))
    assert d.min() > 200.0
    assert entry["points_kept"] + entry["points_removed_near_ends"] == entry["points_read"]


@pytest.mark.slow
def test_share_in_worker_processes_gives_the_same_copy(tmp_path, session_with_face):
    a, rec_a = share_session(session_with_face, tmp_path / "serial", SECRET, radius_m=50.0, workers=1)
    b, rec_b = share_session(session_with_face, tmp_path / "pooled", SECRET, radius_m=50.0, workers=2)
    assert rec_a == rec_b
    assert _tree_digests(a) == _tree_digests(b)


@pytest.mark.parametrize("wrapped", [True, False])
def test_share_json_votes(tmp_path, make_template_session, wrapped):
    raw = make_template_session(tmp_path / "raw")
    lines = [ln for ln in (raw / "votes" / "votes.csv").read_text(encoding="utf-8").splitlines()
             if ln and not ln.startswith("#")][1:]
    votes = [dict(zip(["time", "participant", "comfort", "tsv", "note", "kind"], ln.split(","), strict=False)) for ln in lines]
    doc = {"votes": votes, "operator": "Dr. Someone"} if wrapped else votes
    (raw / "votes" / "votes.json").write_text(json.dumps(doc), encoding="utf-8")
    text = (raw / "session.toml").read_text(encoding="utf-8").replace('path = "votes/votes.csv"',
                                                                       'path = "votes/votes.json"\nformat = "json"')
    (raw / "session.toml").write_text(text, encoding="utf-8")
    folder, record = share_session(raw, tmp_path / "shared", SECRET, radius_m=100.0, blur_faces=False)
    shared = json.loads((folder / "votes" / "votes.json").read_text(encoding="utf-8"))
    if wrapped:
        assert set(shared) == {"votes"}
    else:
        shared = {"votes": shared}
    assert [v["participant"] for v in shared["votes"]] == [privacy.pseudonym("P01", SECRET), ""]
    assert all(v["note"] == "" for v in shared["votes"])
    assert record["files"]["votes/votes.json"]["notes_emptied"] == 1
    assert main(["check", str(folder)]) == 0


# --- kept notes and timestamps outside the kept span --------------------------------------------


@pytest.fixture
def telling_session(session_with_face):
    """Notes with an e-mail address, a phone number and a name; a GPX whose metadata tells the true start."""
    votes = session_with_face / "votes.csv"
    votes.write_text(votes.read_text(encoding="utf-8")
                     .replace("met my neighbour Ana", "ask Ana Lopez: ana.lopez@example.org or +34 612 345 678"),
                     encoding="utf-8")
    gpx = session_with_face / "gps" / "track.gpx"
    text = gpx.read_text(encoding="utf-8")
    meta = ('<metadata><time>2026-07-14T07:58:30Z</time><bounds minlat="40.40" minlon="-3.71" maxlat="40.42" '
            'maxlon="-3.70"/></metadata>\n<wpt lat="40.4165" lon="-3.7038"><time>2026-07-14T07:55:00Z</time>'
            '<name>home</name></wpt>\n<trk>')
    gpx.write_text(text.replace("<trk>", meta, 1), encoding="utf-8")
    return session_with_face


def test_kept_notes_with_personal_data_are_refused_in_one_line(tmp_path, telling_session, capsys):
    secret = tmp_path / "project.secret"
    secret.write_bytes(SECRET)
    args = ["share", str(telling_session), "-o", str(tmp_path / "out"), "--secret-file", str(secret),
            "--trim-radius", "50", "--no-blur", "--workers", "1", "--keep-notes"]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "personal data" in err and "votes.csv:2" in err and "--mask-notes" in err
    for secret_text in ("Ana", "612", "example.org"):  # the message names the kind, never the finding
        assert secret_text not in err
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())
    assert main([*args, "--mask-notes", "--notes-reviewed"]) == 2
    assert "both" in capsys.readouterr().err


def test_masked_notes_and_no_timestamp_outside_the_kept_points(tmp_path, telling_session):
    import re

    raw_before = _tree_digests(telling_session)
    folder, record = share_session(telling_session, tmp_path / "out", SECRET, radius_m=50.0, blur_faces=False,
                                   keep_notes=True, note_policy="mask")
    assert _tree_digests(telling_session) == raw_before
    votes = (folder / "votes.csv").read_text(encoding="utf-8")
    assert "ask [name] [name]: [e-mail] or [phone]" in votes
    assert "hot, no shade" in votes  # notes without personal data are kept as written
    assert record["notes"]["found"] == {"e-mail address": 1, "personal name": 2, "phone number": 1}
    assert record["notes"]["notes_masked"] == 1
    # the sync note ("logger and GPS read together at the start") holds none: kept
    manifest = tomllib.loads((folder / "session.toml").read_text(encoding="utf-8"))
    assert any(ev.get("note") == "logger and GPS read together at the start" for ev in manifest["sync"])
    # every timestamp of the shared GPX lies within the kept points' span; no metadata time, bounds, waypoint
    text = (folder / "gps" / "track.gpx").read_text(encoding="utf-8")
    shared = gpxpy.parse(text)
    pts = [p.time for t in shared.tracks for s in t.segments for p in s.points]
    stamps = [np.datetime64(t.rstrip("Z")) for t in re.findall(r"<time>([^<]+)</time>", text)]
    assert len(stamps) == len(pts) and shared.time is None and "<bounds" not in text and "<wpt" not in text
    assert min(stamps) == np.datetime64(min(pts).replace(tzinfo=None))
    assert record["files"]["gps/track.gpx"]["points_removed_near_ends"] > 0
    # reviewed: kept as written, still counted
    folder2, record2 = share_session(telling_session, tmp_path / "out2", SECRET, radius_m=50.0, blur_faces=False,
                                     keep_notes=True, note_policy="reviewed")
    assert "ana.lopez@example.org" in (folder2 / "votes.csv").read_text(encoding="utf-8")
    assert record2["notes"]["found"]["e-mail address"] == 1


@pytest.mark.parametrize(("text", "kinds"), [
    ("met my neighbour Ana", ["personal name"]),            # a cue word, then a capitalised word
    ("Too hot. Shade near the bank", []),                   # capitalised only at sentence starts
    ("walk with Dr O'Neill today", ["personal name"]),      # the title is a cue, not the name
    ("call +34 612 345 678", ["phone number"]),
    ("phone 612-34-56-78.", ["phone number"]),
    ("at 10:45 on 2026-07-14 UTCI was 35.2", []),           # dates, clock times, acronyms, decimals
    ("write to a.b-c@mail.example.com", ["e-mail address"]),
    ("shady start", []),
])
def test_note_patterns(text, kinds):
    from walkcomfort.imagery.note_scan import find_personal_data

    assert [k for k, _, _ in find_personal_data(text)] == kinds
