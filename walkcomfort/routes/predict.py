"""Predicted comfort along a planned route: the per-point prediction table.

The simulated timeline (:mod:`.simulate`) goes through the same feature code as
recorded walks (:func:`walkcomfort.model.features.build_features`) and then:

* with a model bundle, the comfort model gives class probabilities per point, and
  LightGBM's per-feature contributions give the reasons for the predicted class;
* without one, the physics-only rule (UTCI band → comfort class,
  :func:`walkcomfort.model.baselines.physics_rule`) gives the class; its
  "probabilities" are 0/1 and every row says ``predictor = "physics-rule"``, so a
  reader never mistakes it for a model trained on votes.

The table's columns are the contract in DEVELOPERS.md ("Per-point prediction table").
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pandas as pd

from walkcomfort import columns as C
from walkcomfort.errors import InputError
from walkcomfort.routes.geometry import Route
from walkcomfort.routes.schemes import Scheme, apply_scheme
from walkcomfort.routes.simulate import (
    DEPARTURE,
    ROUTE_ID,
    SCHEME,
    STEP_S,
    STOP,
    add_simulated_environment,
    simulate_timeline,
)
from walkcomfort.routes.timing import DEFAULT_FLAT_SPEED_MS
from walkcomfort.routes.weather import WeatherSource

PHYSICS_RULE = "physics-rule"
PREDICTOR = "predictor"
REASONS = "reasons"
COMFORT_CLASS = "comfort_class"
PROBA = {c: f"p_{c}" for c in C.COMFORT_CLASSES}

#: The contract's columns, in order; extra diagnostic columns follow them.
POINT_COLUMNS = (ROUTE_ID, SCHEME, DEPARTURE, C.LAT, C.LON, C.X_M, C.Y_M, C.DIST_M, C.ELEV_M, C.SLOPE_PCT,
                 C.SUN_ELEV_DEG, C.SHADE_FRAC, C.SVF, C.T_AIR_C, C.RH_PCT, C.TMRT_C, C.UTCI_C, C.UTCI_BAND,
                 *PROBA.values(), COMFORT_CLASS, PREDICTOR, REASONS)
EXTRA_COLUMNS = ("main_factors", C.WALK_ID, STEP_S, STOP, C.SPEED_MS, C.HEADING_DEG, C.WIND_MS, C.WIND10_MS, C.SUN_AZIM_DEG,
                 C.GHI_WM2, C.DNI_WM2, C.DHI_WM2, C.BEAM_TRANS_FRAC, C.TMRT_SOURCE, C.QA_UTCI_RANGE,
                 C.QA_WIND_CLAMPED)


class Predictor:
    """What turns a simulated timeline into comfort classes: a model bundle or the physics rule.

    Parameters
    ----------
    model : ComfortClassifier, optional
        A fitted 3-class comfort model; ``None`` means the physics-only rule.
    label : str, optional
        ``"model:<bundle digest>"``; default from the model.
    """

    def __init__(self, model=None, label: str | None = None):
        self.model = model
        if model is None:
            self.label = PHYSICS_RULE
        else:
            classes = [str(c) for c in getattr(model, "classes_", [])]
            if set(classes) - set(C.COMFORT_CLASSES) or not classes:
                raise InputError(f"the model predicts {classes}, not the comfort classes {list(C.COMFORT_CLASSES)}",
                                 fix="use a bundle fitted on the 3-class comfort vote (target='comfort')")
            from walkcomfort.model.predict import predictor_label

            self.label = label or predictor_label(model)

    @classmethod
    def from_bundle(cls, folder: str | os.PathLike | None) -> Predictor:
        """Load a bundle folder (``None`` -> the physics rule)."""
        if folder is None:
            return cls(None)
        from walkcomfort.model.bundle import load_bundle

        model = load_bundle(Path(folder))
        return cls(model)

    @property
    def is_model(self) -> bool:
        return self.model is not None

    def unavailable_features(self, timeline: pd.DataFrame) -> list[str]:
        """Model features that are missing on every row of a (simulated) timeline.

        A planned walk has no sound meter, light meter or camera, so features built
        from them are NaN throughout and the model falls back on its missing-value
        branches; callers report this so nobody mistakes it for measured conditions.
        """
        if self.model is None or len(timeline) == 0:
            return []
        from walkcomfort.model.features import build_features

        first = timeline[C.WALK_ID].iloc[0] if C.WALK_ID in timeline.columns else None
        one = timeline[timeline[C.WALK_ID] == first] if first is not None else timeline
        from walkcomfort.environment.indices import with_pet
        from walkcomfort.model.features import uses_pet

        X = build_features(with_pet(one) if uses_pet(self.model) else one)
        names = [str(c) for c in getattr(self.model, "feature_names_in_", X.columns)]
        return [c for c in names if c in X.columns and X[c].isna().all()]

    @property
    def n_folds(self) -> int:
        """Fold models the bundle carries (0: no intervals on differences)."""
        return len(getattr(self.model, "fold_models_", None) or []) if self.model is not None else 0

    def predict(self, timeline: pd.DataFrame, explain: bool = True) -> pd.DataFrame:
        """Class probabilities, class and reasons per timeline row.

        Returns
        -------
        DataFrame
            Same index as ``timeline``: ``p_comfortable, p_neutral, p_uncomfortable``
            (sum to 1), ``comfort_class``, ``predictor``, ``reasons``.
        """
        return self.predict_folds(timeline, explain=explain, folds=False)[0]

    def predict_folds(self, timeline: pd.DataFrame, explain: bool = True, folds: bool = True):
        """:meth:`predict` and, from the same features, the fold models' probabilities.

        Returns
        -------
        (DataFrame, ndarray or None)
            The prediction columns, and an array (folds, rows, 3) of ``p_comfortable,
            p_neutral, p_uncomfortable`` by each fold model of the bundle (None for the
            physics rule or a bundle without fold models). Differences computed with each
            fold model give :func:`walkcomfort.routes.compare.delta_interval` its replicates.
        """
        n = len(timeline)
        if self.model is None:
            return _physics(timeline), None
        from walkcomfort.model.predict import predict_timeline_folds

        out, fold_proba = predict_timeline_folds(self.model, timeline, reasons=explain, folds=folds)
        if len(out) != n:
            raise RuntimeError(f"the model gave {len(out)} rows for {n} timeline rows")
        return out, fold_proba


def _physics(timeline: pd.DataFrame) -> pd.DataFrame:
    from walkcomfort.model.baselines import physics_rule

    u = timeline[C.UTCI_C].to_numpy(float)
    cls = physics_rule(u)
    out = pd.DataFrame(index=timeline.index)
    known = np.isfinite(u)
    for c in C.COMFORT_CLASSES:
        out[PROBA[c]] = np.where(known, (cls == c).astype(float), np.nan)  # unknown UTCI: no class, no share
    out[COMFORT_CLASS] = cls
    out[PREDICTOR] = PHYSICS_RULE
    band = timeline[C.UTCI_BAND].astype(str).to_numpy() if C.UTCI_BAND in timeline.columns else [""] * len(u)
    out[REASONS] = [f"UTCI {x:.1f} °C ({b}) -> {c} by the UTCI-band rule (no model)" if np.isfinite(x)
                    else "UTCI unknown" for x, b, c in zip(u, band, cls, strict=False)]
    return out


# --------------------------------------------------------------------------- route prediction
def predict_route(route: Route, departures, weather: WeatherSource, scene=None, scheme: Scheme | None = None,
                  predictor: Predictor | None = None, flat_speed_ms: float = DEFAULT_FLAT_SPEED_MS,
                  timezone: str | None = None, walker: dict | None = None, explain: bool = True,
                  timeline: pd.DataFrame | None = None, **env_kw) -> pd.DataFrame:
    """Per-point predicted comfort for one route, one scheme and one or many departures.

    The table of :func:`predict_route_folds` (see there for the parameters), without the
    fold models' probabilities.
    """
    return predict_route_folds(route, departures, weather, scene, scheme, predictor, flat_speed_ms, timezone,
                               walker, explain, timeline, folds=False, **env_kw)[0]


def predict_route_folds(route: Route, departures, weather: WeatherSource, scene=None, scheme: Scheme | None = None,
                        predictor: Predictor | None = None, flat_speed_ms: float = DEFAULT_FLAT_SPEED_MS,
                        timezone: str | None = None, walker: dict | None = None, explain: bool = True,
                        timeline: pd.DataFrame | None = None, folds: bool = True, **env_kw):
    """Per-point predicted comfort for one route, one scheme and one or many departures.

    Parameters
    ----------
    route : Route
        The planned route.
    departures : DatetimeIndex, Timestamp or list
        tz-aware departure instants (a sweep gives one walk per departure).
    weather : WeatherSource
        Weather file, logger series or stated conditions.
    scene : Scene, optional
        The base scene; ``None`` is open ground (no shade, sky view 1).
    scheme : Scheme, optional
        Edits applied to ``scene``; default the base scene.
    predictor : Predictor, optional
        Model bundle or the physics rule (default).
    flat_speed_ms : float
        Walking speed on flat ground [m s⁻¹].
    timezone : str, optional
        IANA zone recorded with the walk (reports show local time).
    walker : dict, optional
        Walker attributes for the model (``clo``, ``acclimatised``, ``age_band``).
    explain : bool, default True
        Fill ``reasons`` (model contributions); False saves time.
    timeline : DataFrame, optional
        A timeline from :func:`~walkcomfort.routes.simulate.simulate_timeline` for the
        same route and departures, to reuse across schemes (weather is computed once).
    folds : bool, default True
        Also predict with the bundle's fold models (:meth:`Predictor.predict_folds`).
    **env_kw
        Passed to the environment stage.

    Returns
    -------
    (DataFrame, ndarray or None)
        The per-point prediction table (:data:`POINT_COLUMNS` then :data:`EXTRA_COLUMNS`
        where present); index ``time`` (UTC); ``attrs`` carry route, scheme, weather,
        predictor and notices. Then the fold models' probabilities (folds, rows, 3) in the
        table's row order, or None.
    """
    scheme = scheme or Scheme.base()
    if scene is None and not scheme.is_empty:
        raise InputError(f"scheme '{scheme.name}' edits a scene, but no scene was given",
                         fix="pass the base scene (--scene)")
    predictor = predictor or Predictor(None)
    scene_s = apply_scheme(scene, scheme) if scene is not None else None
    if timeline is None:
        timeline = simulate_timeline(route, departures, weather, flat_speed_ms=flat_speed_ms, timezone=timezone,
                                     walker=walker)
    env = add_simulated_environment(timeline, scene=scene_s, **env_kw)
    pred, fold_proba = predictor.predict_folds(env, explain=explain, folds=folds)
    # assign by position: departures of a sweep may share instants, so the index can repeat
    table = env.copy()
    for c in pred.columns:
        table[c] = pred[c].to_numpy()
    table[SCHEME] = scheme.name
    if scene is not None and route.crs != scene.crs.to_string():
        # the environment placed the points through the scene's frame; report them there too
        x, y = scene.project(table[C.LON].to_numpy(float), table[C.LAT].to_numpy(float))
        table[C.X_M], table[C.Y_M] = np.asarray(x, float), np.asarray(y, float)
    cols = [c for c in POINT_COLUMNS if c in table.columns] + [c for c in EXTRA_COLUMNS if c in table.columns]
    missing = [c for c in POINT_COLUMNS if c not in table.columns]
    if missing:
        raise InputError(f"the environment stage did not give columns {missing}",
                         fix="update walkcomfort (routes and environment must be of one version)")
    out = table[cols].copy()
    out.index.name = C.TIME
    out.attrs = {"route_id": route.route_id, "scheme": scheme.name, "scheme_label": scheme.label,
                 "weather": getattr(weather, "label", ""), "predictor": predictor.label,
                 "notices": list(route.notices) + list(getattr(weather, "notices", []) or []),
                 "session": dict(timeline.attrs.get("session", {}))}
    return out, fold_proba
