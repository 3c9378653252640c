"""Comfort model: history features, gradient-boosted classifier, grouped validation, bundles.

Public API (each module has its own docstring with units and sources):

- :func:`walkcomfort.model.features.build_features` and the declared
  :data:`~walkcomfort.model.features.FEATURES` — one feature row per timeline row,
  history windows looking back only, per walk.
- :class:`walkcomfort.model.classifier.ComfortClassifier` — LightGBM multiclass in a
  scikit-learn-style estimator (deterministic; presets for small campaigns).
- :mod:`walkcomfort.model.baselines` — majority class, the UTCI-band rule
  (:func:`~walkcomfort.model.baselines.physics_rule`), current-conditions logistic regression.
- :mod:`walkcomfort.model.evaluate` — grouped (walker) splits, cross-validation, metrics.
- :mod:`walkcomfort.model.explain` — feature contributions and reasons in words.
- :mod:`walkcomfort.model.calibration` — neutral UTCI and acceptable UTCI range of the voters.
- :func:`walkcomfort.model.bundle.save_bundle` / :func:`~walkcomfort.model.bundle.load_bundle`.
- :func:`predict_timeline` (from :mod:`walkcomfort.model.predict`) — what other stages call:
  a model or bundle folder + a timeline -> ``p_comfortable, p_neutral, p_uncomfortable,
  comfort_class, predictor, reasons`` per row.
- :mod:`walkcomfort.model.workflow` — what ``walkcomfort fit`` / ``evaluate`` run.
"""

from walkcomfort.model.predict import predict_timeline  # noqa: F401  (re-exported)
