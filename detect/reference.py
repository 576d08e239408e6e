"""Fault-free reference models: each feature as a function of the driving conditions.

For each feature (``t_evap``, ``t_cond``, ``superheat``, ...) a quadratic ridge regression on the
driving conditions (outdoor air, return air temperature and humidity, compressor speed when
present): ``StandardScaler -> PolynomialFeatures(2) -> RidgeCV``. A quadratic surface extrapolates
smoothly a little beyond the training weather, where trees would go flat (measured in
library-notes section 6: at 10 K beyond the training range the ridge model was still right, a
gradient-boosting model 11 K off).

Training samples further than ``OUTLIER_SPREADS`` robust standard deviations (1.4826 x median
absolute deviation) from a first fit are dropped before the final fit: one garbage value must not
bend a baseline.

Uncertainty: the residual spread comes from 5-fold cross-validation in contiguous time blocks
(out-of-sample), both per sample and for hourly medians (the unit of judgement in
:mod:`rimewatch.detect.diagnose`; minute residuals are autocorrelated, so the hourly spread is
measured, not divided down).

Training envelope: the range of every driver in the training data. Inside it the model judges.
Within ``EXTRAPOLATION_MARGIN`` of the range (the larger of ``EXTRAPOLATION_MARGIN_SHARE`` of
the range and the absolute margin of the driver) it judges with its uncertainty widened by
``EXTRAPOLATION_WIDENING`` and flags the residual as extrapolated; beyond that it abstains (NaN):
new weather is never a fault.

Storage: plain JSON (``to_dict``/``from_dict``): the scaler's means and scales, the polynomial
exponents, the ridge coefficients and intercept, the training window, envelope and fit
statistics. Loading builds a numpy predictor from those numbers; nothing executable is stored,
so a baseline file can be read from anyone safely. scikit-learn is needed to fit, not to predict.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from rimewatch.detect.features import DRIVERS

FORMAT_VERSION = 1
MIN_TRAINING_SAMPLES = 120
MIN_TRAINING_HOURS = 8
EXTRAPOLATION_MARGIN_SHARE = 0.15
EXTRAPOLATION_WIDENING = 1.5
#: absolute margin per driver beyond its training range [K, -, Hz]
EXTRAPOLATION_MARGIN = {
    "outdoor_air_temp": 2.0,
    "return_air_temp": 1.0,
    "return_air_humidity": 0.05,
    "compressor_speed": 2.0,
}
RIDGE_ALPHAS = np.logspace(-3, 3, 13)
CV_FOLDS = 5
OUTLIER_SPREADS = 6.0


class BaselineError(ValueError):
    """A baseline that cannot be fitted or read; the message says why."""


@dataclass(frozen=True)
class ReferenceModel:
    """A fitted fault-free model of one feature (numpy predictor rebuilt from stored numbers).

    Attributes
    ----------
    feature : the modelled feature.
    drivers : driving-condition columns, in order.
    mean, scale : StandardScaler parameters per driver.
    powers : exponents of each polynomial term (rows) per driver (columns).
    coef, intercept : ridge coefficients per term and intercept.
    alpha : the ridge penalty RidgeCV chose.
    envelope : driver -> (min, max) in the training data.
    sigma : out-of-sample residual standard deviation per sample [feature unit].
    sigma_hourly : the same for hourly medians [feature unit].
    samples : training samples; hours : distinct training hours.
    """

    feature: str
    drivers: tuple[str, ...]
    mean: tuple[float, ...]
    scale: tuple[float, ...]
    powers: tuple[tuple[int, ...], ...]
    coef: tuple[float, ...]
    intercept: float
    alpha: float
    envelope: dict
    sigma: float
    sigma_hourly: float
    samples: int
    hours: int

    def predict(self, drivers: pd.DataFrame) -> np.ndarray:
        """Prediction per row of ``drivers`` (NaN where a driver is missing)."""
        return self.predict_array(drivers[list(self.drivers)].to_numpy(dtype=float))

    def predict_array(self, x: np.ndarray) -> np.ndarray:
        """Prediction per row of ``x``, one column per driver in ``self.drivers`` order."""
        return self.terms(x) @ np.asarray(self.coef) + self.intercept

    @property
    def terms_key(self) -> tuple:
        """Models with equal keys have equal :meth:`terms` for the same drivers."""
        return self.drivers, self.mean, self.scale, self.powers

    def terms(self, x: np.ndarray) -> np.ndarray:
        """Polynomial terms of the scaled drivers, one row per row of ``x``."""
        z = (x - np.asarray(self.mean)) / np.asarray(self.scale)
        powers = np.asarray(self.powers, dtype=float)[None, :, :]
        if powers.max(initial=0.0) <= 2.0:  # the same factors, with one pow per sample and driver
            squares = z ** np.full(z.shape[1], 2.0)
            linear = np.where(powers == 1.0, z[:, None, :], squares[:, None, :])
            factors = np.where(powers == 0.0, 1.0, linear)
        else:
            factors = z[:, None, :] ** powers
        return np.prod(factors, axis=2)

    def envelope_position(self, drivers: pd.DataFrame) -> np.ndarray:
        """0 inside the training envelope, 1 within the extrapolation margin, 2 beyond (abstain)."""
        return self.envelope_position_array(drivers[list(self.drivers)].to_numpy(dtype=float))

    def envelope_position_array(self, x: np.ndarray) -> np.ndarray:
        """:meth:`envelope_position` of ``x``, one column per driver in ``self.drivers`` order."""
        return envelope_positions((self,), x)[:, 0]

    def to_dict(self) -> dict:
        return {
            "feature": self.feature,
            "drivers": list(self.drivers),
            "scaler": {"mean": list(self.mean), "scale": list(self.scale)},
            "polynomial_powers": [list(p) for p in self.powers],
            "ridge": {"coef": list(self.coef), "intercept": self.intercept, "alpha": self.alpha},
            "envelope": {k: list(v) for k, v in self.envelope.items()},
            "fit": {
                "sigma": self.sigma,
                "sigma_hourly": self.sigma_hourly,
                "samples": self.samples,
                "hours": self.hours,
            },
        }

    @classmethod
    def from_dict(cls, data: dict) -> ReferenceModel:
        try:
            drivers = tuple(str(d) for d in data["drivers"])
            powers = tuple(tuple(int(v) for v in row) for row in data["polynomial_powers"])
            model = cls(
                feature=str(data["feature"]),
                drivers=drivers,
                mean=tuple(float(v) for v in data["scaler"]["mean"]),
                scale=tuple(float(v) for v in data["scaler"]["scale"]),
                powers=powers,
                coef=tuple(float(v) for v in data["ridge"]["coef"]),
                intercept=float(data["ridge"]["intercept"]),
                alpha=float(data["ridge"]["alpha"]),
                envelope={k: (float(v[0]), float(v[1])) for k, v in data["envelope"].items()},
                sigma=float(data["fit"]["sigma"]),
                sigma_hourly=float(data["fit"]["sigma_hourly"]),
                samples=int(data["fit"]["samples"]),
                hours=int(data["fit"]["hours"]),
            )
        except (KeyError, TypeError, ValueError, IndexError) as exc:
            raise BaselineError(f"reference model is malformed: {exc!r}") from None
        n = len(drivers)
        if len(model.mean) != n or len(model.scale) != n or any(len(p) != n for p in powers):
            raise BaselineError(f"reference model {model.feature}: driver counts disagree")
        if len(model.coef) != len(powers) or set(model.envelope) != set(drivers):
            raise BaselineError(f"reference model {model.feature}: coefficient counts disagree")
        return model


def envelope_positions(models, x: np.ndarray) -> np.ndarray:
    """Envelope position (0 in, 1 near, 2 beyond) per row of ``x`` (rows) and model (columns).

    ``models`` share one driver tuple, the column order of ``x``; the margin of a driver is the
    larger of ``EXTRAPOLATION_MARGIN_SHARE`` of its training range and its absolute margin.
    """
    drivers = models[0].drivers
    low = np.array([[m.envelope[d][0] for d in drivers] for m in models])
    high = np.array([[m.envelope[d][1] for d in drivers] for m in models])
    absolute = np.array([EXTRAPOLATION_MARGIN.get(d, 0.0) for d in drivers])
    margin = np.maximum(EXTRAPOLATION_MARGIN_SHARE * (high - low), absolute)
    position = np.zeros((len(x), len(models)), dtype=int)
    # rows inside the envelope every model shares are 0 for all: judge only the others
    rest = ~((x >= low.max(axis=0)) & (x <= high.min(axis=0))).all(axis=1)
    values = x[rest][:, None, :]  # rows x models x drivers
    outside = (values < low) | (values > high)
    beyond = (values < low - margin) | (values > high + margin) | ~np.isfinite(values)
    position[rest] = np.where(beyond, 2, outside.astype(int)).max(axis=2, initial=0)
    return position


def _fit_one(feature: str, drivers: tuple[str, ...], x: np.ndarray, y: np.ndarray, hours):
    from sklearn.linear_model import RidgeCV
    from sklearn.model_selection import KFold, cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import PolynomialFeatures, StandardScaler

    def pipeline():
        return make_pipeline(StandardScaler(), PolynomialFeatures(2), RidgeCV(alphas=RIDGE_ALPHAS))

    # drop gross outliers (a garbage value that passed the range checks) before judging the fit
    first = pipeline().fit(x, y).predict(x)
    spread = 1.4826 * np.median(np.abs(y - first - np.median(y - first)))
    keep = np.abs(y - first) <= OUTLIER_SPREADS * max(spread, 1e-12)
    x, y, hours = x[keep], y[keep], np.asarray(hours)[keep]
    folds = KFold(n_splits=CV_FOLDS, shuffle=False)  # contiguous blocks in time
    predicted = cross_val_predict(pipeline(), x, y, cv=folds)
    residual = y - predicted
    hourly = pd.Series(residual).groupby(np.asarray(hours)).median()
    fitted = pipeline().fit(x, y)
    scaler, poly, ridge = (fitted[i] for i in range(3))
    return ReferenceModel(
        feature=feature,
        drivers=drivers,
        mean=tuple(float(v) for v in scaler.mean_),
        scale=tuple(float(v) if v > 0 else 1.0 for v in scaler.scale_),
        powers=tuple(tuple(int(v) for v in row) for row in poly.powers_),
        coef=tuple(float(v) for v in ridge.coef_),
        intercept=float(ridge.intercept_),
        alpha=float(ridge.alpha_),
        envelope={d: (float(x[:, i].min()), float(x[:, i].max())) for i, d in enumerate(drivers)},
        sigma=float(np.std(residual, ddof=1)),
        sigma_hourly=float(np.std(hourly.to_numpy(), ddof=1)) if len(hourly) > 2 else np.nan,
        samples=len(y),
        hours=len(hourly),
    )


@dataclass
class Baseline:
    """The reference models of one unit, with their training window (UTC)."""

    unit: str
    start: pd.Timestamp
    end: pd.Timestamp
    models: dict[str, ReferenceModel]
    drivers: tuple[str, ...]
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        from sklearn import __version__ as sklearn_version

        return {
            "format": "rimewatch-baseline",
            "version": FORMAT_VERSION,
            "unit": self.unit,
            "training_window": [self.start.isoformat(), self.end.isoformat()],
            "drivers": list(self.drivers),
            "fitted_with": f"scikit-learn {sklearn_version}",
            "notes": list(self.notes),
            "models": {name: model.to_dict() for name, model in self.models.items()},
        }

    @classmethod
    def from_dict(cls, data: dict) -> Baseline:
        if not isinstance(data, dict) or data.get("format") != "rimewatch-baseline":
            raise BaselineError("not a rimewatch baseline (format field missing)")
        if data.get("version") != FORMAT_VERSION:
            raise BaselineError(f"baseline format version {data.get('version')} is not supported")
        try:
            start, end = (pd.Timestamp(t) for t in data["training_window"])
            models = {name: ReferenceModel.from_dict(m) for name, m in data["models"].items()}
            return cls(
                str(data["unit"]), start, end, models, tuple(data["drivers"]), data.get("notes", [])
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise BaselineError(f"baseline is malformed: {exc!r}") from None

    def residuals(self, features: pd.DataFrame) -> tuple[pd.DataFrame, pd.Series]:
        """(measured - predicted per feature, envelope position per row: 0 in, 1 near, 2 out)."""
        names = {*self.models, *(d for m in self.models.values() for d in m.drivers)}
        columns = {name: features[name].to_numpy(dtype=float) for name in names if name in features}
        out, position = self.residual_arrays(columns, len(features))
        frame = pd.DataFrame(out, index=features.index)
        return frame, pd.Series(position, index=features.index, name="envelope")

    def residual_arrays(
        self, columns: dict[str, np.ndarray], n: int
    ) -> tuple[dict[str, np.ndarray], np.ndarray]:
        """:meth:`residuals` of ``n`` samples given as feature -> array (NaN beyond envelope)."""
        groups: dict[tuple[str, ...], dict[str, ReferenceModel]] = {}  # models mostly share drivers
        for name, model in self.models.items():
            if name in columns:
                groups.setdefault(model.drivers, {})[name] = model
        inside, predicted = {}, {}
        for drivers, models in groups.items():
            x = np.array([columns[d] for d in drivers], dtype=float).T
            positions = envelope_positions(tuple(models.values()), x)
            terms: dict[tuple, np.ndarray] = {}  # ... and often one scaler
            for j, (name, model) in enumerate(models.items()):
                inside[name] = positions[:, j]
                shared = terms.get(model.terms_key)
                if shared is None:
                    shared = terms[model.terms_key] = model.terms(x)
                predicted[name] = shared @ np.asarray(model.coef) + model.intercept
        out = {}
        position = np.zeros(n, dtype=int)
        for name in self.models:
            if name in columns:
                measured = np.asarray(columns[name], dtype=float)
                out[name] = np.where(inside[name] < 2, measured - predicted[name], np.nan)
                position = np.maximum(position, inside[name])
        return out, position


def choose_drivers(features: pd.DataFrame) -> tuple[str, ...]:
    """Drivers with data in (nearly) every sample and some spread."""
    chosen = []
    for name in DRIVERS:
        if name not in features:
            continue
        values = features[name]
        if values.notna().mean() >= 0.95 and values.std() > 1e-6:
            chosen.append(name)
    if "outdoor_air_temp" not in chosen:
        raise BaselineError("the baseline needs outdoor air temperature readings in steady running")
    return tuple(chosen)


def fit_baseline(
    unit: str,
    features: pd.DataFrame,
    start,
    end,
    model_features: tuple[str, ...],
) -> Baseline:
    """Fit one reference model per feature on steady, sensor-fault-free samples.

    Parameters
    ----------
    unit : the unit's key.
    features : per-minute features and drivers of the samples to train on (already restricted
        to steady samples without sensor findings, inside the training window).
    start, end : the training window, stored with the models.
    model_features : which features to model (those with too little data are skipped and noted).
    """
    if len(features) < MIN_TRAINING_SAMPLES:
        raise BaselineError(
            f"unit {unit}: {len(features)} steady samples in the training window; at least "
            f"{MIN_TRAINING_SAMPLES} are needed (choose a longer period with the unit running)"
        )
    drivers = choose_drivers(features)
    hours = features.index.floor("1h")
    if hours.nunique() < MIN_TRAINING_HOURS:
        raise BaselineError(
            f"unit {unit}: steady running in only {hours.nunique()} hours of the training window; "
            f"at least {MIN_TRAINING_HOURS} are needed"
        )
    models, notes = {}, []
    for name in model_features:
        if name not in features:
            continue
        frame = features[[*drivers, name]].dropna()
        if len(frame) < MIN_TRAINING_SAMPLES:
            if features[name].notna().any():
                notes.append(f"{name}: only {len(frame)} samples, not modelled")
            continue
        models[name] = _fit_one(
            name,
            drivers,
            frame[list(drivers)].to_numpy(dtype=float),
            frame[name].to_numpy(dtype=float),
            frame.index.floor("1h"),
        )
    if not models:
        raise BaselineError(f"unit {unit}: no feature had enough data to model")
    return Baseline(unit, pd.Timestamp(start), pd.Timestamp(end), models, drivers, notes)
