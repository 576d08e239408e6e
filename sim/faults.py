"""Injected faults: what, how strong, from when, and how each one enters the unit model.

A fault has a code (design.md's fault codes), a severity, an onset (UTC) and a ramp: the severity
rises linearly from 0 at the onset to its full value ``ramp_days`` later (0 = a step). The
severity per code (all dimensionless, 0 = healthy):

=========================  ===============================================================
low_charge                 share of the design charge missing
overcharge                 share of the design charge added
condenser_fouling          share of the condenser air flow lost (fouled coil or failing fan)
evaporator_airflow_low     share of the evaporator air flow lost (dirty filter, fouled coil, fan)
liquid_line_restriction    liquid-line pressure drop at design flow / design high-to-low difference
compressor_valve_leakage   share of the compressed gas leaking back to suction
non_condensables           partial pressure of non-condensable gas / design condensing pressure
expansion_valve_fault      share of the valve's (or orifice's) largest flow area lost
sensor_fault               with ``point`` and ``kind``: stuck (frozen from the onset),
                           drift (offset growing by ``severity`` x 1 K, 20 kPa, 2 % RH or
                           2 % of reading per day), gauge_as_absolute (a gauge transducer
                           read as absolute: 1 atm low)
=========================  ===============================================================

Text form (command line): ``code:key=value:key=value``, for example
``low_charge:severity=0.25:onset=2026-07-03:ramp=3d`` or
``sensor_fault:point=suction_temp:kind=drift:severity=0.5:onset=2026-07-02``.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

import numpy as np
import pandas as pd

from rimewatch.sim.model import Conditions

REFRIGERANT_FAULTS = {
    "low_charge": ("charge_factor", -1.0),
    "overcharge": ("charge_factor", 1.0),
    "condenser_fouling": ("condenser_airflow_factor", -1.0),
    "evaporator_airflow_low": ("evaporator_airflow_factor", -1.0),
    "liquid_line_restriction": ("restriction", 1.0),
    "compressor_valve_leakage": ("leakage", 1.0),
    "non_condensables": ("noncondensable", 1.0),
    "expansion_valve_fault": ("valve_factor", -1.0),
}
SENSOR_FAULT_KINDS = ("stuck", "drift", "gauge_as_absolute")
FAULT_CODES = (*REFRIGERANT_FAULTS, "sensor_fault")
MAX_SEVERITY = {"low_charge": 0.6, "overcharge": 0.5, "non_condensables": 0.4}


class FaultError(ValueError):
    """A fault description that cannot be used; the message says which part."""


@dataclass(frozen=True)
class FaultSpec:
    """One injected fault.

    Attributes
    ----------
    code : one of ``FAULT_CODES``.
    severity : see the module docstring.
    onset : UTC time the fault starts.
    ramp_days : days from the onset to full severity (0 = step).
    point, kind : for ``sensor_fault``: the point role and one of ``SENSOR_FAULT_KINDS``.
    """

    code: str
    severity: float
    onset: datetime
    ramp_days: float = 0.0
    point: str | None = None
    kind: str | None = None

    def __post_init__(self):
        if self.code not in FAULT_CODES:
            raise FaultError(f"unknown fault {self.code!r}; known: {', '.join(FAULT_CODES)}")
        if not np.isfinite(self.severity) or self.severity < 0:
            raise FaultError(f"{self.code}: severity must be a number >= 0, got {self.severity}")
        limit = MAX_SEVERITY.get(self.code, 0.95)
        if self.code != "sensor_fault" and self.severity > limit:
            raise FaultError(f"{self.code}: severity {self.severity} above the model's {limit}")
        if self.ramp_days < 0:
            raise FaultError(f"{self.code}: ramp must be >= 0 days")
        if self.onset.tzinfo is None:
            raise FaultError(f"{self.code}: onset must carry a time zone (UTC)")
        if self.code == "sensor_fault" and (
            self.point is None or self.kind not in SENSOR_FAULT_KINDS
        ):
            raise FaultError(
                "sensor_fault needs point=<role> and kind=" + "|".join(SENSOR_FAULT_KINDS)
            )

    def profile(self, times: pd.DatetimeIndex) -> np.ndarray:
        """Severity at each time: 0 before the onset, a linear ramp, then ``severity``."""
        elapsed_days = (times - pd.Timestamp(self.onset)) / pd.Timedelta("1D")
        elapsed_days = np.asarray(elapsed_days, float)
        if self.ramp_days > 0:
            share = np.clip(elapsed_days / self.ramp_days, 0.0, 1.0)
        else:
            share = (elapsed_days >= 0).astype(float)
        return self.severity * share

    def to_dict(self) -> dict:
        out = {
            "code": self.code,
            "severity": self.severity,
            "onset": self.onset.isoformat(),
            "ramp_days": self.ramp_days,
        }
        if self.code == "sensor_fault":
            out.update(point=self.point, kind=self.kind)
        return out


def _parse_time(text: str) -> datetime:
    try:
        stamp = pd.Timestamp(text)
    except ValueError as error:
        raise FaultError(f"onset {text!r} is not an ISO 8601 date or time") from error
    if stamp.tzinfo is None:
        stamp = stamp.tz_localize("UTC")
    return stamp.tz_convert("UTC").to_pydatetime()


def _parse_days(text: str) -> float:
    value = text.strip().lower()
    scale = 1.0
    if value.endswith("d"):
        value = value[:-1]
    elif value.endswith("h"):
        value, scale = value[:-1], 1.0 / 24.0
    try:
        return float(value) * scale
    except ValueError as error:
        raise FaultError(f"ramp {text!r}: expected e.g. 3d or 12h") from error


def parse_fault(text: str, default_onset: datetime | None = None) -> FaultSpec:
    """Parse ``code:key=value:...`` (keys: severity, onset, ramp, point, kind)."""
    code, *parts = text.strip().split(":")
    fields: dict[str, str] = {}
    key = None
    for part in parts:
        name, sep, value = part.partition("=")
        if not sep and key == "onset":  # a time of day: the colon belonged to the onset
            fields[key] += ":" + part.strip()
            continue
        if not sep or not name:
            raise FaultError(f"fault {text!r}: expected key=value after the code, got {part!r}")
        key = name.strip()
        fields[key] = value.strip()
    unknown = set(fields) - {"severity", "onset", "ramp", "point", "kind"}
    if unknown:
        raise FaultError(
            f"fault {text!r}: unknown key(s) {', '.join(sorted(unknown))}; "
            "known: severity, onset, ramp, point, kind"
        )
    try:
        severity = float(fields.get("severity", "1" if code == "sensor_fault" else "nan"))
    except ValueError as error:
        raise FaultError(f"fault {text!r}: severity must be a number") from error
    if "onset" in fields:
        onset = _parse_time(fields["onset"])
    elif default_onset is not None:
        onset = default_onset
    else:
        raise FaultError(f"fault {text!r}: give onset=<ISO 8601 date>")
    return FaultSpec(
        code=code.strip(),
        severity=severity,
        onset=onset,
        ramp_days=_parse_days(fields["ramp"]) if "ramp" in fields else 0.0,
        point=fields.get("point"),
        kind=fields.get("kind"),
    )


def apply_refrigerant_faults(cond: Conditions, faults, times: pd.DatetimeIndex) -> Conditions:
    """Conditions with every refrigerant-side fault's severity profile applied (new object)."""
    out = cond.take(slice(None))
    for fault in faults:
        if fault.code not in REFRIGERANT_FAULTS:
            continue
        attribute, sign = REFRIGERANT_FAULTS[fault.code]
        current = getattr(out, attribute).copy()
        setattr(out, attribute, current + sign * fault.profile(times))
    return out


def apply_sensor_faults(readings: dict, faults, times: pd.DatetimeIndex, atmospheric_pressure):
    """Apply sensor faults in place to measured series (SI) keyed by point role."""
    for fault in faults:
        if fault.code != "sensor_fault":
            continue
        if fault.point not in readings:
            raise FaultError(
                f"sensor_fault: point {fault.point!r} is not simulated for this unit; "
                f"points: {', '.join(readings)}"
            )
        values = readings[fault.point]
        active = fault.profile(times) > 0
        if fault.kind == "stuck":
            start = np.flatnonzero(active)
            if start.size:
                held = values[: start[0] + 1]
                finite = held[np.isfinite(held)]
                values[active] = finite[-1] if finite.size else np.nan
        elif fault.kind == "drift":
            days = np.clip((times - pd.Timestamp(fault.onset)) / pd.Timedelta("1D"), 0, None)
            rate = _drift_rate(fault.point, values)
            values += fault.severity * rate * np.asarray(days, float)
        elif fault.kind == "gauge_as_absolute":
            if not fault.point.endswith("pressure"):
                raise FaultError(
                    f"sensor_fault gauge_as_absolute needs a pressure point, not {fault.point}"
                )
            values[active] -= atmospheric_pressure


def _drift_rate(point: str, values: np.ndarray):
    if point.endswith("pressure"):
        return 20e3  # Pa per day at severity 1
    if point.endswith("humidity"):
        return 0.02
    if point.endswith("temp"):
        return 1.0
    return 0.02 * np.nanmedian(np.abs(values[values != 0])) if np.any(values) else 0.0


def healthy_like(cond: Conditions) -> Conditions:
    """The same boundary conditions with every fault modifier reset to healthy."""
    return Conditions.healthy(cond.outdoor_temp, cond.outdoor_w, cond.return_temp, cond.return_w)
