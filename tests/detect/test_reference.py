"""Reference models: fit quality against a known law, JSON round trip, abstention outside."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from simulated import ONSET, START, baseline

from rimewatch.detect.reference import Baseline, BaselineError, ReferenceModel, fit_baseline


def _known_law(n=3000, seed=1, noise=0.4, outdoor=(290.0, 305.0)):
    """Condensing temperature as a smooth (quadratic) function of its drivers plus white noise."""
    rng = np.random.default_rng(seed)
    index = pd.date_range("2026-07-01", periods=n, freq="1min", tz="UTC")
    t_out = rng.uniform(*outdoor, n)
    t_ret = rng.uniform(295.0, 300.0, n)
    truth = 300.0 + 1.05 * (t_out - 273.15) + 0.3 * (t_ret - 297.0) + 0.004 * (t_out - 295.0) ** 2
    frame = pd.DataFrame(
        {
            "outdoor_air_temp": t_out,
            "return_air_temp": t_ret,
            "t_cond": truth + rng.normal(0, noise, n),
        },
        index=index,
    )
    return frame, truth


def test_fit_recovers_the_law_and_its_noise():
    frame, truth = _known_law()
    fitted = fit_baseline("u", frame, frame.index[0], frame.index[-1], ("t_cond",))
    model = fitted.models["t_cond"]
    # out-of-sample residual spread = the noise we added (0.4 K), within sampling error
    assert model.sigma == pytest.approx(0.4, rel=0.1)
    assert np.max(np.abs(model.predict(frame) - truth)) < 0.15
    # hourly medians of white noise: spread ~ 0.4 * 1.2533 / sqrt(60) = 0.065 K
    assert model.sigma_hourly == pytest.approx(0.4 * 1.2533 / np.sqrt(60), rel=0.35)


def test_json_round_trip_predicts_the_same_and_holds_no_code():
    frame, _ = _known_law()
    fitted = fit_baseline("u", frame, frame.index[0], frame.index[-1], ("t_cond",))
    text = json.dumps(fitted.to_dict())
    assert "pickle" not in text and "__" not in text
    loaded = Baseline.from_dict(json.loads(text))
    np.testing.assert_array_equal(
        loaded.models["t_cond"].predict(frame), fitted.models["t_cond"].predict(frame)
    )
    assert loaded.start == fitted.start and loaded.end == fitted.end


def test_scikit_learn_pipeline_and_rebuilt_predictor_agree():
    from sklearn.linear_model import RidgeCV
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import PolynomialFeatures, StandardScaler

    frame, _ = _known_law()
    model = fit_baseline("u", frame, frame.index[0], frame.index[-1], ("t_cond",)).models["t_cond"]
    x = frame[list(model.drivers)].to_numpy()
    reference = make_pipeline(
        StandardScaler(), PolynomialFeatures(2), RidgeCV(alphas=[model.alpha])
    ).fit(x, frame["t_cond"].to_numpy())
    np.testing.assert_allclose(model.predict(frame), reference.predict(x), atol=1e-9)


def test_extrapolation_is_flagged_then_abstained():
    frame, _ = _known_law(outdoor=(290.0, 300.0))
    fitted = fit_baseline("u", frame, frame.index[0], frame.index[-1], ("t_cond",))
    probe = pd.DataFrame(
        {
            "outdoor_air_temp": [295.0, 301.0, 320.0],  # inside, within the margin, far beyond
            "return_air_temp": [297.0, 297.0, 297.0],
            "t_cond": [330.0, 330.0, 330.0],
        }
    )
    residuals, position = fitted.residuals(probe)
    assert list(position) == [0, 1, 2]
    assert residuals["t_cond"].notna().tolist() == [True, True, False]


@pytest.mark.parametrize(
    "broken",
    [
        {},
        {"format": "rimewatch-baseline", "version": 99},
        {"format": "rimewatch-baseline", "version": 1, "unit": "u", "training_window": ["x"]},
    ],
)
def test_malformed_baselines_refused(broken):
    with pytest.raises(BaselineError):
        Baseline.from_dict(broken)


def test_model_with_mismatched_coefficients_refused():
    frame, _ = _known_law()
    data = fit_baseline("u", frame, frame.index[0], frame.index[-1], ("t_cond",)).to_dict()
    data["models"]["t_cond"]["ridge"]["coef"] = [1.0]
    with pytest.raises(BaselineError, match="counts disagree"):
        ReferenceModel.from_dict(data["models"]["t_cond"])


def test_too_little_data_refused_with_a_reason():
    frame, _ = _known_law(n=50)
    with pytest.raises(BaselineError, match="steady samples"):
        fit_baseline("u", frame, frame.index[0], frame.index[-1], ("t_cond",))


def test_simulated_baseline_is_tight():
    """A week of simulated fault-free running: hourly residual spread well under a kelvin."""
    fitted = baseline("rooftop_unit")
    assert fitted.start == pd.Timestamp(START) and fitted.end == pd.Timestamp(ONSET)
    for name in ("t_evap", "t_cond", "superheat", "subcooling"):
        assert 0 < fitted.models[name].sigma_hourly < 0.5, name
    assert "outdoor_air_temp" in fitted.drivers
