"""A route walked with real weather from a file nobody here wrote: pvlib's Greensboro TMY3."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from walkcomfort import columns as C
from walkcomfort.routes.compare import summarise
from walkcomfort.routes.geometry import load_route
from walkcomfort.routes.predict import predict_route
from walkcomfort.routes.timing import parse_departures

LAT, LON = 36.08, -79.94  # a few km from the Greensboro station (36.1, -79.95)
TZ = "America/New_York"


@pytest.fixture
def route(tmp_path):
    p = tmp_path / "gso.geojson"
    p.write_text(json.dumps({"type": "Feature", "properties": {"route_id": "gso"},
                             "geometry": {"type": "LineString", "coordinates": [[LON, LAT], [LON + 0.0015, LAT]]}}))
    return load_route(p)


@pytest.fixture
def gso_weather(gso_file):
    return gso_file


def test_sun_up_at_the_expected_hours_and_night_has_no_direct_sun(route, gso_weather):
    deps = parse_departures("2026-07-09T00:00..2026-07-09T23:00/1h", timezone=TZ)
    pts = predict_route(route, deps, gso_weather)
    first = pts.groupby("departure").head(1).set_index("departure")
    hour = first.index.tz_convert(TZ).hour
    # at 36.1° N on 9 July, sunrise is about 06:10 and sunset about 20:40 EDT (NOAA solar calculator, from memory)
    assert (first[C.SUN_ELEV_DEG].to_numpy()[(hour >= 7) & (hour <= 20)] > 0).all()
    assert (first[C.SUN_ELEV_DEG].to_numpy()[(hour <= 5) | (hour >= 22)] < 0).all()
    # solar noon near 13:25 EDT: highest sun ~ 90 − 36.1 + 22.4 (declination on 9 July) ≈ 76° (from the definition)
    noon = first[C.SUN_ELEV_DEG].idxmax().tz_convert(TZ)
    assert noon.hour == 13 and first[C.SUN_ELEV_DEG].max() == pytest.approx(76.0, abs=1.5)
    night = pts[pts[C.SUN_ELEV_DEG] <= 0]
    assert len(night) > 0
    assert (night[C.DNI_WM2] == 0).all() and (night[C.GHI_WM2] == 0).all()
    # no sun on the body at night: Tmrt cannot exceed air temperature under a clear or cloudy night sky
    assert (night[C.TMRT_C] <= night[C.T_AIR_C] + 0.5).all()
    day = pts[pts[C.SUN_ELEV_DEG] > 30]
    assert (day[C.TMRT_C] > day[C.T_AIR_C] + 5).mean() > 0.9


def test_utci_tracks_the_files_temperature(route, gso_weather):
    days = pd.date_range("2026-01-03", "2026-12-28", freq="5D")
    deps = parse_departures([f"{d.date()}T03:00" for d in days] + [f"{d.date()}T15:00" for d in days], timezone=TZ)
    pts = predict_route(route, deps, gso_weather, explain=False)
    s = summarise(pts).set_index("departure")
    t_air = pts.groupby("departure")[C.T_AIR_C].mean().reindex(s.index)
    for hour in (3, 15):
        sel = s.index.tz_convert(TZ).hour == hour
        r = np.corrcoef(t_air[sel], s.loc[sel, "mean_utci_c"])[0, 1]
        assert r > 0.9, (hour, r)
    # the air temperature along the walk is the file's, at the file's instants
    on_hour = pts[(pts.index.minute == 0) & (pts.index.second == 0) & (pts.index.microsecond == 0)]
    assert len(on_hour) >= 10
    for t, v in on_hour[C.T_AIR_C].head(10).items():
        assert v == pytest.approx(gso_weather._ext[C.T_AIR_C].loc[t.replace(year=2001)], abs=1e-9)
