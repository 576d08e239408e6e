"""Diagnosis: residual sign patterns and decoupled indicators -> one ranked fault with a confidence.

**Residuals.** Per UTC hour, the median over its steady samples of (measured - expected) for each
feature: expected from the fault-free reference models once a baseline exists, from the day-one
rules (:mod:`rimewatch.detect.rules`) before. Each residual r has a band eps (no fault inside it)
and an uncertainty sigma.

**Classifier** after Rossi and Braun [1]: every fault class predicts for each feature a residual
that is positive (+), negative (-) or inside the band (0). Treating the hour's residual as normal
with mean r and standard deviation sigma,

.. math::

    P_+ = 1 - \\Phi\\left(\\frac{\\epsilon - r}{\\sigma}\\right), \\quad
    P_- = \\Phi\\left(\\frac{-\\epsilon - r}{\\sigma}\\right), \\quad P_0 = 1 - P_+ - P_-

and the likelihood of a class is the product over its features of the probability of its
predicted sign (features assumed independent, as in [1]). The hour is abnormal when the
fault-free class (every feature 0) has probability below ``ABNORMAL_BELOW``; the fault classes'
likelihoods, normalised, rank the candidates and the top one's share is the confidence.

**Patterns.** The seven temperature features of [1] (evaporating, superheat, condensing,
subcooling, discharge, condenser air rise, evaporator air drop) plus decoupled indicators after
Li and Braun [2]: the liquid temperature against outdoor air (charge vs. non-condensables), the
compressor volumetric-efficiency ratio (valve leakage), virtual condenser and evaporator airflows
(fouled coils, lost airflow) and the liquid-line pressure drop (restriction). [1] studied a unit
with a fixed orifice; on units with a thermostatic or electronic valve the valve holds superheat,
so superheat carries little, and **overcharge, non-condensable gas and condenser fouling share one
sign pattern** in [1]'s seven features (condensing and discharge temperatures up, superheat
held). The decoupled indicators separate them: condenser fouling lowers the condenser airflow and
raises the condenser air temperature rise; overcharge backs liquid up into the condenser and cools
it towards outdoor air (liquid approach down); non-condensable gas adds its partial pressure, so
the pressure-based subcooling rises while the liquid temperature does not fall. Without a
liquid-pressure point a liquid-line restriction and a stuck or blocked expansion device also
share a pattern (both starve the evaporator): both are then ranked with a split confidence.
The signs come from [1] (fixed orifice, table from memory) and from the physics; each entry was
checked against our simulator (:mod:`rimewatch.sim`) at moderate severity.

References
----------
.. [1] Rossi, T. M., Braun, J. E. (1997). "A statistical, rule-based fault detection and
   diagnostic method for vapor compression air conditioners." HVAC&R Research 3(1): 19-37.
.. [2] Li, H., Braun, J. E. (2007). "Decoupling features and virtual sensors for diagnosis of
   faults in vapor compression air conditioners." International Journal of Refrigeration
   30(3): 546-564.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.special import ndtr

from rimewatch.detect.findings import Finding, HourlyFindings, finding_key
from rimewatch.detect.quality import DRIVER_POINTS, FEATURE_POINTS, hourly_medians

REFRIGERANT_FAULTS = (
    "low_charge",
    "overcharge",
    "condenser_fouling",
    "evaporator_airflow_low",
    "liquid_line_restriction",
    "compressor_valve_leakage",
    "non_condensables",
    "expansion_valve_fault",
)
ABNORMAL_BELOW = 0.05
MIN_STEADY_PER_HOUR = 10
#: smallest band per feature, whatever the baseline's spread [feature unit]
BAND_FLOOR = {
    "volumetric_efficiency_ratio": 0.05,
    "condenser_airflow_ratio": 0.08,
    "evaporator_airflow_ratio": 0.08,
    "liquid_line_drop": 20e3,
}
TEMPERATURE_BAND_FLOOR_K = 0.8
BAND_SIGMAS = 3.0

_RB = ("t_evap", "superheat", "t_cond", "subcooling", "discharge_temp")
_VALVE = {
    # feature: sign; "0+" = inside the band or above it; absent = not used
    "low_charge": {
        "t_cond": "-", "subcooling": "-", "liquid_approach": "+",
        "volumetric_efficiency_ratio": "0",
        "condenser_airflow_ratio": "0", "liquid_line_drop": "0",
    },
    "overcharge": {
        "t_cond": "+", "superheat": "0-", "subcooling": "+", "discharge_temp": "+",
        "liquid_approach": "-", "condenser_air_rise": "0+", "condenser_airflow_ratio": "0",
        "volumetric_efficiency_ratio": "0",
    },
    "condenser_fouling": {
        "t_cond": "+", "superheat": "0", "discharge_temp": "+", "condenser_air_rise": "+",
        "liquid_approach": "+", "condenser_airflow_ratio": "-", "volumetric_efficiency_ratio": "0",
    },
    "evaporator_airflow_low": {
        "t_evap": "-", "superheat": "0-", "evaporator_air_drop": "+",
        "evaporator_airflow_ratio": "-",
        "volumetric_efficiency_ratio": "0", "condenser_air_rise": "0-",
    },
    "liquid_line_restriction": {
        "t_evap": "-", "superheat": "+", "subcooling": "+", "discharge_temp": "+",
        "liquid_line_drop": "+", "volumetric_efficiency_ratio": "0",
    },
    "compressor_valve_leakage": {
        "t_evap": "+", "t_cond": "-", "superheat": "0-", "volumetric_efficiency_ratio": "-",
        "condenser_air_rise": "-",
    },
    "non_condensables": {
        "t_cond": "+", "superheat": "0-", "subcooling": "+", "discharge_temp": "0+",
        "liquid_approach": "0+", "condenser_air_rise": "0", "condenser_airflow_ratio": "0",
        "volumetric_efficiency_ratio": "0",
    },
    "expansion_valve_fault": {
        "t_evap": "-", "superheat": "+", "subcooling": "+", "discharge_temp": "+",
        "liquid_line_drop": "0", "volumetric_efficiency_ratio": "0",
    },
}  # fmt: skip
_ORIFICE = {
    "low_charge": {
        "t_evap": "-", "superheat": "+", "t_cond": "-", "subcooling": "-", "discharge_temp": "+",
        "condenser_air_rise": "-", "volumetric_efficiency_ratio": "0", "liquid_line_drop": "0",
    },
    "overcharge": {
        "t_evap": "+", "superheat": "-", "t_cond": "+", "subcooling": "+", "discharge_temp": "-",
        "liquid_approach": "-", "condenser_airflow_ratio": "0", "volumetric_efficiency_ratio": "0",
    },
    "condenser_fouling": {
        "t_evap": "+", "t_cond": "+", "discharge_temp": "+", "condenser_air_rise": "+",
        "liquid_approach": "+", "condenser_airflow_ratio": "-", "volumetric_efficiency_ratio": "0",
    },
    "evaporator_airflow_low": {
        "t_evap": "-", "superheat": "-", "t_cond": "-", "discharge_temp": "-",
        "evaporator_air_drop": "+", "evaporator_airflow_ratio": "-",
        "volumetric_efficiency_ratio": "0",
    },
    "liquid_line_restriction": {
        "t_evap": "-", "superheat": "+", "subcooling": "+", "discharge_temp": "+",
        "liquid_line_drop": "+", "volumetric_efficiency_ratio": "0",
    },
    "compressor_valve_leakage": {
        "t_evap": "+", "t_cond": "-", "superheat": "-", "discharge_temp": "-",
        "volumetric_efficiency_ratio": "-", "condenser_air_rise": "-",
    },
    "non_condensables": {
        "t_evap": "+", "t_cond": "+", "superheat": "-", "subcooling": "+",
        "liquid_approach": "0+", "condenser_air_rise": "0", "condenser_airflow_ratio": "0",
        "volumetric_efficiency_ratio": "0",
    },
    "expansion_valve_fault": {
        "t_evap": "-", "superheat": "+", "subcooling": "+", "discharge_temp": "+",
        "liquid_line_drop": "0", "volumetric_efficiency_ratio": "0",
    },
}  # fmt: skip
PATTERNS = {"valve": _VALVE, "orifice": _ORIFICE}
#: sensors a residual pattern can blame (residual drift), with the feature each one drives most
SINGLE_SENSOR_FEATURES = {
    "superheat": "suction_temp",
    "discharge_temp": "discharge_temp",
    "liquid_approach": "liquid_temp",
    "evaporator_air_drop": "supply_air_temp",
    "condenser_air_rise": "condenser_leaving_air_temp",
}
#: each fault's main feature and the direction it moves (severity when no impact is known)
SEVERITY_FEATURE = {
    "low_charge": ("subcooling", -1),
    "overcharge": ("subcooling", 1),
    "condenser_fouling": ("t_cond", 1),
    "evaporator_airflow_low": ("t_evap", -1),
    "liquid_line_restriction": ("superheat", 1),
    "compressor_valve_leakage": ("volumetric_efficiency_ratio", -1),
    "non_condensables": ("t_cond", 1),
    "expansion_valve_fault": ("superheat", 1),
}
SEVERITY_LABELS = ((0.05, "mild"), (0.15, "moderate"))  # loss share below which the label holds


def _phi(x: np.ndarray) -> np.ndarray:
    """Standard normal cumulative distribution."""
    return ndtr(np.asarray(x, float))


def sign_probabilities(r, eps, sigma) -> dict[str, np.ndarray]:
    """P(+), P(-), P(0) of residuals r with band eps and uncertainty sigma (arrays)."""
    r, eps, sigma = (np.asarray(v, float) for v in (r, eps, sigma))
    plus = 1.0 - _phi((eps - r) / sigma)
    minus = _phi((-eps - r) / sigma)
    zero = np.clip(1.0 - plus - minus, 0.0, 1.0)
    return {"+": plus, "-": minus, "0": zero, "0+": zero + plus, "0-": zero + minus}


@dataclass(frozen=True)
class HourlyResiduals:
    """Hourly residuals of one unit: values, bands and uncertainties (hours x features arrays)."""

    hours: pd.DatetimeIndex
    features: tuple[str, ...]  # the columns of r, eps and sigma
    r: np.ndarray
    eps: np.ndarray
    sigma: np.ndarray
    steady_samples: np.ndarray  # steady one-minute samples per hour
    extrapolated: np.ndarray  # share of the hour's samples judged outside the training envelope


def hourly_residuals(
    residuals: dict[str, np.ndarray],
    slot: np.ndarray,
    bands: dict[str, float],
    sigmas: dict[str, float],
    hours: pd.DatetimeIndex,
    extrapolated: np.ndarray | None = None,
    widening: float = 1.0,
) -> HourlyResiduals:
    """Medians of per-minute residuals per hour, with bands and uncertainties.

    Parameters
    ----------
    residuals : feature -> per-minute residuals of the steady samples.
    slot : position in ``hours`` of each sample's hour (-1 outside,
        :func:`rimewatch.detect.quality.hour_slots`).
    bands, sigmas : per feature: the band eps and the uncertainty of an hourly median.
    hours : the hours to report on.
    extrapolated : per-minute flag, sample judged within the extrapolation margin.
    widening : factor on eps and sigma for hours mostly extrapolated.
    """
    names = tuple(residuals)
    inside = slot >= 0
    rows = np.bincount(slot[inside], minlength=len(hours))
    columns = np.array([residuals[name] for name in names], dtype=float).reshape(
        len(names), len(slot)
    )
    medians = hourly_medians(columns, slot, len(hours))[0].T
    medians[rows < MIN_STEADY_PER_HOUR] = np.nan
    share = np.zeros(len(hours))
    if extrapolated is not None:
        flags = np.asarray(extrapolated, dtype=float)[inside]
        total = np.bincount(slot[inside], weights=flags, minlength=len(hours))
        np.divide(total, rows, out=share, where=rows > 0)
    factor = np.where(share > 0.5, widening, 1.0)[:, None]
    eps = np.array([bands.get(c, np.nan) for c in names], dtype=float)[None, :] * factor
    sigma = np.array([sigmas.get(c, np.nan) for c in names], dtype=float)[None, :] * factor
    return HourlyResiduals(hours, names, medians, eps, sigma, rows, share)


def band_and_sigma(feature: str, sigma_hourly: float) -> tuple[float, float]:
    """Band eps = max(3 sigma, floor) and the uncertainty used in the sign probabilities."""
    floor = BAND_FLOOR.get(feature, TEMPERATURE_BAND_FLOOR_K)
    sigma = sigma_hourly if np.isfinite(sigma_hourly) else floor
    eps = max(BAND_SIGMAS * sigma, floor)
    return eps, max(sigma, floor / BAND_SIGMAS)


def classify(r: pd.Series, eps: pd.Series, sigma: pd.Series, device_class: str) -> dict:
    """One hour: probability of no fault and the normalised ranking of the fault classes.

    Returns
    -------
    dict with ``normal`` (probability every feature is inside its band), ``ranking`` [(code,
    share)] best first (empty when no class fits at all), ``deviating`` (features with P0 < 0.05).
    """
    residual = r.to_numpy(dtype=float)
    bands = (eps if eps.index.equals(r.index) else eps.reindex(r.index)).to_numpy(dtype=float)
    spreads = (sigma if sigma.index.equals(r.index) else sigma.reindex(r.index)).to_numpy(
        dtype=float
    )
    available = ~(np.isnan(residual) | np.isnan(bands) | np.isnan(spreads))
    probabilities = sign_probabilities(residual[available], bands[available], spreads[available])
    return _rank(list(r.index[available]), probabilities, device_class)


def _rank(names: list[str], probabilities: dict[str, np.ndarray], device_class: str) -> dict:
    """:func:`classify` from the sign probabilities of the features judged (``names``)."""
    p = {sign: dict(zip(names, v.tolist(), strict=True)) for sign, v in probabilities.items()}
    normal = float(np.prod(probabilities["0"])) if names else 1.0
    deviating = [n for n in names if p["0"][n] < 0.05]
    inside = p["0"]
    scores = {}
    for code, pattern in PATTERNS[device_class].items():
        used = [f for f in pattern if f in inside]
        signed = [f for f in used if pattern[f] in ("+", "-")]
        if len(signed) < 2:
            continue  # not enough of this fault's evidence is measured
        scores[code] = math.prod(p[pattern[f]][f] for f in used)
    total = sum(scores.values())
    ranking = []
    if total > 1e-12:
        ranking = sorted(((c, s / total) for c, s in scores.items()), key=lambda cs: -cs[1])
    return {
        "normal": normal,
        "ranking": ranking,
        "deviating": deviating,
        "inside": inside,
        "fit": total,
    }


def suspect_sensor(deviating: list[str], inside: dict[str, float]) -> str | None:
    """The one sensor that all deviating features share, when features built from the other
    candidates look normal; None when no single sensor explains the deviations.

    A drifting suction temperature, say, moves superheat and the enthalpy-based virtual sensors
    but leaves the evaporating temperature (suction pressure alone) as expected.
    """
    if not deviating:
        return None
    candidates = set.intersection(*(set(FEATURE_POINTS.get(f, ())) for f in deviating))
    normal = [f for f, p0 in inside.items() if p0 > 0.5 and f not in deviating]
    for single_point_only in (True, False):
        for feature in normal:
            points = set(FEATURE_POINTS.get(feature, ()))
            if len(candidates) > 1 and (len(points) == 1 or not single_point_only):
                candidates = (candidates - points) or candidates
    if len(candidates) != 1:
        return None
    (point,) = candidates
    primary = {v: k for k, v in SINGLE_SENSOR_FEATURES.items()}.get(point)
    return point if primary in deviating else None


@dataclass(frozen=True)
class ImpactInputs:
    """Per-hour measured and expected capacity and power for the impact estimate (W), one value
    per hour of the analysis."""

    capacity: np.ndarray
    capacity_expected: np.ndarray
    power: np.ndarray
    power_expected: np.ndarray
    running_hours_per_day: float


def impact(inputs: ImpactInputs | None, hour: int, tariff_per_kWh: float) -> dict:
    """Capacity lost %, extra power %, extra kWh and cost per day for one hour's evidence
    (``hour``: its position in the analysed hours).

    Extra energy: the same cooling at the reduced COP needs E (COP_ref / COP - 1) more energy,
    with E the energy the unit uses per day at this hour's power and its running hours per day.
    """
    if inputs is None:
        return {}
    q, q0 = inputs.capacity[hour], inputs.capacity_expected[hour]
    w, w0 = inputs.power[hour], inputs.power_expected[hour]
    if not all(np.isfinite(v) and v > 0 for v in (q, q0, w, w0)):
        return {}
    cop, cop0 = q / w, q0 / w0
    daily_kwh = w / 1000.0 * inputs.running_hours_per_day
    extra_kwh = max(0.0, daily_kwh * (cop0 / cop - 1.0))
    return {
        "capacity_loss_pct": round(100.0 * (1.0 - q / q0), 1),
        "extra_power_pct": round(100.0 * (w / w0 - 1.0), 1),
        "cop_loss_pct": round(100.0 * (1.0 - cop / cop0), 1),
        "extra_kwh_per_day": round(extra_kwh, 2),
        "cost_per_day": round(extra_kwh * tariff_per_kWh, 2),
    }


def severity_score(code: str, r: dict, eps: dict, hour_impact: dict) -> float:
    """0..1: from the lost share of capacity or COP when known, else from the main residual."""
    losses = [hour_impact.get("capacity_loss_pct"), hour_impact.get("cop_loss_pct")]
    losses = [v / 100.0 for v in losses if v is not None and np.isfinite(v)]
    if losses:
        return float(np.clip(max(losses) / 0.3, 0.0, 1.0))
    feature, direction = SEVERITY_FEATURE[code]
    value, band = r.get(feature, np.nan), eps.get(feature, np.nan)
    if not (np.isfinite(value) and np.isfinite(band) and band > 0):
        return 0.1
    return float(np.clip(direction * value / band / 6.0, 0.05, 1.0))


def severity_label(score: float) -> str:
    """mild / moderate / severe from a 0..1 score (0.3 of capacity or COP lost = 1)."""
    loss = 0.3 * score
    for limit, label in SEVERITY_LABELS:
        if loss < limit:
            return label
    return "severe"


def _faulty_positions(faulty: dict, hours: pd.DatetimeIndex) -> dict[int, set[str]]:
    """``faulty`` (hour -> points) keyed by position in ``hours`` instead (other hours dropped)."""
    if not faulty:
        return {}
    position = {ns: k for k, ns in enumerate(hours.as_unit("ns").asi8.tolist())}
    out = {}
    for hour, points in faulty.items():
        k = position.get(pd.Timestamp(hour).value)
        if k is not None:
            out[k] = points
    return out


def diagnose(
    residuals: HourlyResiduals,
    device_class: str,
    faulty: dict,
    impacts: ImpactInputs | None = None,
    tariff_per_kWh: float = 0.25,
    residual_drift: bool = True,
) -> HourlyFindings:
    """Per hour: abnormal or not, the ranked fault, its confidence, severity and impact.

    Parameters
    ----------
    residuals : from :func:`hourly_residuals`.
    device_class : ``"valve"`` (TXV/EEV) or ``"orifice"``.
    faulty : hour -> points under a sensor finding (:func:`rimewatch.detect.quality.faulty_points`):
        their features are dropped for that hour; a fault on a driver point skips the hour.
    impacts : measured/expected capacity and power per hour, for the impact figures.
    tariff_per_kWh : energy price for the cost per day [currency/kWh].
    residual_drift : report deviations that one sensor explains as that sensor's drift
        (:func:`suspect_sensor`; baseline mode, the day-one rules judge too few features).
    """
    hours, names = residuals.hours, residuals.features
    out = HourlyFindings(hours, {}, {}, pd.Series(residuals.steady_samples, index=hours))
    values, bands, spreads = residuals.r, residuals.eps, residuals.sigma
    probabilities = sign_probabilities(values, bands, spreads)  # hours x features, every sign
    known = np.isfinite(values) & np.isfinite(bands) & np.isfinite(spreads)
    inside = np.where(known, probabilities["0"], 1.0)
    available = ~(np.isnan(values) | np.isnan(bands) | np.isnan(spreads))
    normal_all = np.prod(inside, axis=1)  # every feature judged: the quick test of a sound hour
    bad_at = _faulty_positions(faulty, hours)
    checked = np.isfinite(values).sum(axis=1) >= 3
    for k, bad in bad_at.items():
        if "all" in bad or bad & set(DRIVER_POINTS):
            checked[k] = False
    # sound hours (no sensor finding, every feature likely inside its band) need no ranking
    sound = checked & (normal_all >= ABNORMAL_BELOW)
    sound[[k for k, bad in bad_at.items() if bad]] = False
    drift_checked = {
        point: sound & np.isfinite(values[:, names.index(feature)])
        if feature in names
        else np.zeros(len(hours), dtype=bool)
        for feature, point in SINGLE_SENSOR_FEATURES.items()
    }
    found: dict = {code: {} for code in REFRIGERANT_FAULTS}
    drift_found: dict = {p: {} for p in SINGLE_SENSOR_FEATURES.values()}
    points_of = [set(FEATURE_POINTS.get(f, ())) for f in names]
    for i in np.flatnonzero(checked & ~sound).tolist():
        bad = bad_at.get(i, set())
        keep = [j for j, points in enumerate(points_of) if not points & bad]
        kept = [names[j] for j in keep]
        r = dict(zip(kept, values[i, keep], strict=True))
        eps = dict(zip(kept, bands[i, keep], strict=True))
        judged = [j for j in keep if available[i, j]]
        hour = {sign: p[i, judged] for sign, p in probabilities.items()}
        result = _rank([names[j] for j in judged], hour, device_class)
        for feature, point in SINGLE_SENSOR_FEATURES.items():
            if feature in r and np.isfinite(r[feature]):
                drift_checked[point][i] = True
        if result["normal"] >= ABNORMAL_BELOW:
            continue
        samples = int(residuals.steady_samples[i])
        point = suspect_sensor(result["deviating"], result["inside"]) if residual_drift else None
        unexplained = not result["ranking"] or result["ranking"][0][1] < 0.5
        if point is not None and (unexplained or result["fit"] < 1e-3):
            feature = {v: k for k, v in SINGLE_SENSOR_FEATURES.items()}[point]
            shown = ", ".join(f"{f} {r[f]:+.2f}" for f in result["deviating"])
            drift_found[point][i] = Finding(
                float(min(1.0, abs(r[feature]) / (6 * eps[feature]))),
                0.6,
                f"residuals {shown} all depend on {point} and everything else is as "
                "expected: the sensor has probably drifted",
                samples,
            )
            continue
        if not result["ranking"] or result["fit"] < 1e-3:
            continue  # abnormal but no fault pattern fits: not raised as a refrigerant fault
        code, confidence = result["ranking"][0]
        hour_impact = impact(impacts, i, tariff_per_kWh)
        score = severity_score(code, r, eps, hour_impact)
        evidence = ", ".join(
            f"{f} {r[f]:+.2f}" for f in result["deviating"] if f in PATTERNS[device_class][code]
        )
        found[code][i] = Finding(
            score,
            float(confidence),
            f"residuals {evidence}" if evidence else "residual pattern",
            samples,
            tuple((c, round(float(s), 3)) for c, s in result["ranking"][:4]),
            hour_impact,
        )
    for code in REFRIGERANT_FAULTS:
        out.set_positions(code, checked, found[code])
    for point in drift_found:
        out.set_positions(
            finding_key("sensor_fault", f"{point}:drift"),
            drift_checked[point],
            drift_found[point],
        )
    return out
