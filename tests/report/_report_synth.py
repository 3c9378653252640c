"""Invented inputs for the report tests (stand-ins shaped like the DEVELOPERS.md contracts)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from walkcomfort import columns as C

LAT0, LON0 = 40.0, -3.0  # an invented spot; metres per degree from the spherical approximation below
M_PER_DEG_LAT = 111_320.0

XSS_NOTE = ("</script><script>window.__pwned=1</script><img src=x onerror=\"window.__pwned=2\">"
            "`${window.__pwned=3}`\\'\";window.__pwned=4;//<svg onload=window.__pwned=5>")
XSS_LABEL = "Shade <img src=x onerror=window.__pwned=6> `${window.__pwned=7}` \\\" '"


def offset(x_m, y_m):
    lat = LAT0 + np.asarray(y_m) / M_PER_DEG_LAT
    lon = LON0 + np.asarray(x_m) / (M_PER_DEG_LAT * np.cos(np.radians(LAT0)))
    return lat, lon


def predictions(schemes=("baseline", "trees"), departures=("2026-07-14T07:00Z", "2026-07-14T10:00Z"),
                n=80, spacing_m=5.0, routes=("r1",)) -> pd.DataFrame:
    """A per-point prediction table: an L-shaped route, comfort falling where the sun hits."""
    frames = []
    for r_i, route in enumerate(routes):
        s = np.arange(n) * spacing_m
        half = s.max() / 2
        x = np.where(s <= half, s, half) + 200.0 * r_i
        y = np.where(s <= half, 0.0, s - half)
        lat, lon = offset(x, y)
        for k, scheme in enumerate(schemes):
            for j, dep in enumerate(departures):
                dep = pd.Timestamp(dep)
                t = dep + pd.to_timedelta(s / 1.3, unit="s")
                sun = (np.sin(s / 40.0) > -0.2).astype(float)
                shade = np.clip(1.0 - sun + 0.3 * k, 0, 1)
                utci = 24.0 + 4.0 * j + 9.0 * (1 - shade) - 2.0 * k
                p_unc = np.clip((utci - 26.0) / 10.0, 0.02, 0.9)
                p_com = np.clip((30.0 - utci) / 10.0, 0.02, 0.9)
                p_neu = np.clip(1.0 - p_unc - p_com, 0.02, None)
                tot = p_unc + p_com + p_neu
                probs = np.c_[p_com, p_neu, p_unc] / tot[:, None]
                cls = np.asarray(C.COMFORT_CLASSES)[probs.argmax(axis=1)]
                df = pd.DataFrame({
                    "route_id": route, "scheme": scheme, "departure": dep,
                    C.LAT: lat, C.LON: lon, C.X_M: x + 440000.0, C.Y_M: y + 4428000.0, C.DIST_M: s,
                    C.ELEV_M: 650.0, C.SLOPE_PCT: 0.0, C.SUN_ELEV_DEG: 40.0, C.SHADE_FRAC: shade,
                    C.SVF: 0.6, C.T_AIR_C: 26.0 + 3 * j, C.RH_PCT: 40.0, C.TMRT_C: utci + 15.0,
                    C.UTCI_C: utci,
                    "p_comfortable": probs[:, 0], "p_neutral": probs[:, 1], "p_uncomfortable": probs[:, 2],
                    "comfort_class": cls, "predictor": "physics-rule",
                    "reasons": np.where(shade > 0.5, "shade_frac high; tmrt_c low", "tmrt_c high; time in sun 4 min"),
                }, index=pd.DatetimeIndex(t, name=C.TIME))
                frames.append(df)
    out = pd.concat(frames)
    from walkcomfort.report.palette import utci_band_name
    out[C.UTCI_BAND] = [utci_band_name(v) for v in out[C.UTCI_C]]
    return out


def timeline(n=600, walk_id="tw-p01-am", participant="P01", note=None, with_prediction=True,
             start="2026-07-14T07:58:00Z") -> pd.DataFrame:
    """A recorded-walk timeline at 1 s with a few votes (one carrying ``note``)."""
    t = pd.date_range(start, periods=n, freq="1s", tz="UTC", name=C.TIME)
    s = np.arange(n) * 1.2
    lat, lon = offset(s * 0.7, s * 0.3)
    rng = np.random.default_rng(3)
    sun = (np.sin(s / 50.0) > 0).astype(float)
    t_air = 27 + 0.002 * np.arange(n) + rng.normal(0, 0.05, n)
    tmrt = t_air + 5 + 25 * sun
    utci = t_air + 0.35 * (tmrt - t_air)
    df = pd.DataFrame({
        C.WALK_ID: walk_id, C.PARTICIPANT: participant, C.LAT: lat, C.LON: lon,
        C.ELEV_M: 650 + 3 * np.sin(s / 90.0), C.DIST_M: s, C.SPEED_MS: 1.2 + rng.normal(0, 0.05, n),
        C.T_AIR_C: t_air, C.RH_PCT: 40.0, C.WIND_MS: 1.5, C.T_GLOBE_C: t_air + 10 * sun,
        C.LAEQ_DB: 58 + 8 * np.sin(s / 30.0), C.ILLUM_LUX: 20000 + 60000 * sun,
        C.TMRT_C: tmrt, C.UTCI_C: utci,
        C.VOTE_COMFORT: pd.Series([None] * n, dtype=object).to_numpy(),
        C.VOTE_TSV: np.nan, C.VOTE_NOTE: pd.Series([None] * n, dtype=object).to_numpy(),
        C.VOTE_KIND: pd.Series([None] * n, dtype=object).to_numpy(),
    }, index=t)
    votes = [(60, "comfortable", -1, "prompted", "nice breeze"), (180, "neutral", 0, "prompted", None),
             (300, "uncomfortable", 2, "spontaneous", note), (420, "uncomfortable", 3, "prompted", "too hot here"),
             (540, "neutral", 1, "prompted", None)]
    for i, cls, tsv, kind, text in votes:
        if i < n:
            df.iloc[i, df.columns.get_loc(C.VOTE_COMFORT)] = cls
            df.iloc[i, df.columns.get_loc(C.VOTE_TSV)] = tsv
            df.iloc[i, df.columns.get_loc(C.VOTE_KIND)] = kind
            df.iloc[i, df.columns.get_loc(C.VOTE_NOTE)] = text
    if with_prediction:
        pred = np.where(utci > 33, "uncomfortable", np.where(utci > 29, "neutral", "comfortable"))
        df["comfort_class"] = pred
    df.attrs["session"] = {"timezone": "Europe/Madrid", "site": "Invented Town"}
    return df


def scene() -> dict:
    lat, lon = offset(np.array([20.0, 60.0, 60.0, 20.0, 20.0]), np.array([10.0, 10.0, 40.0, 40.0, 10.0]))
    tlat, tlon = offset(np.array([100.0]), np.array([-8.0]))
    clat, clon = offset(np.array([150.0, 190.0, 190.0, 150.0, 150.0]), np.array([5.0, 5.0, 12.0, 12.0, 5.0]))
    return {"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"id": "b1", "kind": "building", "height_m": 12.0},
         "geometry": {"type": "Polygon", "coordinates": [[[float(a), float(b)] for a, b in zip(lon, lat, strict=False)]]}},
        {"type": "Feature", "properties": {"id": "t1", "kind": "tree", "height_m": 8.0, "crown_base_m": 3.0,
                                           "crown_radius_m": 4.0, "transmissivity": 0.2},
         "geometry": {"type": "Point", "coordinates": [float(tlon[0]), float(tlat[0])]}},
        {"type": "Feature", "properties": {"id": "c1", "kind": "canopy", "height_m": 3.0, "transmissivity": 0.1},
         "geometry": {"type": "Polygon", "coordinates": [[[float(a), float(b)] for a, b in zip(clon, clat, strict=False)]]}},
    ]}


def scheme(name="trees", label="More street trees") -> dict:
    lat, lon = offset(np.array([120.0, 160.0]), np.array([-6.0, -6.0]))
    return {"type": "FeatureCollection", "walkcomfort": {"scheme": name, "label": label}, "features": [
        {"type": "Feature", "properties": {"edit": "add", "id": "t-new-1", "kind": "tree", "height_m": 7.0,
                                           "crown_base_m": 2.5, "crown_radius_m": 3.5, "transmissivity": 0.25},
         "geometry": {"type": "Point", "coordinates": [float(lon[0]), float(lat[0])]}},
        {"type": "Feature", "properties": {"edit": "add", "id": "t-new-2", "kind": "tree", "height_m": 7.0,
                                           "crown_base_m": 2.5, "crown_radius_m": 3.5, "transmissivity": 0.25},
         "geometry": {"type": "Point", "coordinates": [float(lon[1]), float(lat[1])]}},
        {"type": "Feature", "properties": {"edit": "remove", "target": "c1"}, "geometry": None},
        {"type": "Feature", "properties": {"edit": "modify", "target": "t1", "transmissivity": 0.1},
         "geometry": None},
    ]}


def summaries(points: pd.DataFrame) -> pd.DataFrame:
    """Route summaries shaped like walkcomfort.routes.compare.summarise (the fields the map shows)."""
    rows = []
    for (route, scheme, dep), g in points.groupby(["route_id", "scheme", "departure"], sort=True):
        rows.append({"route_id": route, "scheme": scheme, "departure": dep,
                     "walk_min": (g.index.max() - g.index.min()).total_seconds() / 60, "length_m": g[C.DIST_M].max(),
                     "exp_min_comfortable": g["p_comfortable"].mean() * (g.index.max() - g.index.min()).total_seconds() / 60,
                     **{f"exp_share_{c}": g[f"p_{c}"].mean() for c in C.COMFORT_CLASSES},
                     "shade_share": float((g[C.SHADE_FRAC] >= 0.5).mean()), "mean_utci_c": g[C.UTCI_C].mean(),
                     "peak_utci_c": g[C.UTCI_C].max(), "heat_dose_cmin": 42.0})
    return pd.DataFrame(rows)


def network_summary(n_streets=3, n_seg=4, seg_m=50.0, hours=10.0, street_name=XSS_LABEL) -> dict:
    """A ``segment_summary.geojson`` as ``walkcomfort network`` writes it: base + "trees" per segment.

    Comfortable hours rise along each street (0 .. ``hours``); the trees scheme gains 2 h on the
    first street, loses 1 h on the second and changes nothing on the third.
    """
    feats = []
    change = {0: 2.0, 1: -1.0, 2: 0.0}
    for s in range(n_streets):
        for k in range(n_seg):
            x = np.array([k * seg_m, k * seg_m + seg_m / 2, (k + 1) * seg_m])
            lat, lon = offset(x, np.full(3, -40.0 - 40.0 * s))
            comf = hours * k / max(n_seg - 1, 1)
            base = {"hours_h": hours, "comfortable_h": comf, "expected_comfortable_h": comf * 0.9,
                    "uncomfortable_h": hours - comf, "heat_stress_h": hours - comf, "mean_utci_c": 30.0 + s,
                    "max_utci_c": 35.0, "mean_shade_frac": 0.1 * k}
            d = change[s % 3]
            new = min(hours, max(0.0, comf + d)) - comf
            trees = dict(base, comfortable_h=comf + new, d_comfortable_h=new, d_expected_comfortable_h=new,
                         d_heat_stress_h=-new, d_mean_utci_c=-0.5 * new, gained_comfortable_h=max(new, 0.0),
                         lost_comfortable_h=max(-new, 0.0), uncomfortable_to_comfortable_h=max(new, 0.0))
            feats.append({"type": "Feature", "properties": {
                C.SEGMENT_ID: f"st{s}#{k:03d}", C.STREET_ID: f"st{s}", "name": street_name if s == 0 else f"Street {s}",
                "length_m": seg_m, "schemes": {"base": base, "trees": trees}},
                "geometry": {"type": "LineString", "coordinates": [[float(a), float(b)] for a, b in zip(lon, lat, strict=False)]}})
    return {"type": "FeatureCollection", "walkcomfort": {"network": "synthetic", "summary": "segments", "base": "base"},
            "features": feats}


def network_layers() -> list[dict]:
    """The base and trees map layers of :func:`network_summary` (through the network stage's own function)."""
    from walkcomfort.network.summaries import network_layer

    summary = network_summary()
    return [network_layer(summary, "base"), network_layer(summary, "trees")]


def page_data(page: str) -> dict:
    """The map page's data block (what its script draws from)."""
    import json
    import re

    m = re.search(r'<script type="application/json" id="wc-data">(.*?)</script>', page, re.S)
    assert m is not None, "no data block in the page"
    return json.loads(m.group(1))


def comparison(points: pd.DataFrame, half_width_min: float = 0.5, base: str = "base") -> pd.DataFrame:
    """A comparison table as routes.compare writes it, with the interval columns of the contract."""
    summ = summaries(points)
    b = summ[summ["scheme"] == base].set_index("departure")
    out = summ[summ["scheme"] != base].copy()
    for col in ("exp_min_comfortable", "heat_dose_cmin", "peak_utci_c", "mean_utci_c"):
        out[f"delta_{col}"] = out[col].to_numpy() - b[col].reindex(out["departure"]).to_numpy()
        out[f"delta_{col}_lo"] = out[f"delta_{col}"] - half_width_min
        out[f"delta_{col}_hi"] = out[f"delta_{col}"] + half_width_min
    out["within_model_error"] = (out["delta_exp_min_comfortable_lo"] <= 0) & (out["delta_exp_min_comfortable_hi"] >= 0)
    return out.reset_index(drop=True)
