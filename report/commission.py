"""Commissioning report: wiring, units and refrigerant of each unit; go / no-go for detection.

:func:`build_unit_report` runs :func:`rimewatch.physics.assignment.commission_unit` on a unit's
readings and gathers what a person needs to act: each point's verdict with its evidence, the
corrections to write in the site file (as YAML), data coverage and sampling, and the trade's
cautions. :func:`render_html` turns reports into one self-contained HTML page.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime

import numpy as np
import pandas as pd
import yaml
from jinja2 import Environment, PackageLoader, select_autoescape

from rimewatch.physics import assignment as asg
from rimewatch.physics.refrigerant import get_refrigerant

# A unit string's counterpart when the sensor reports the other way (see UNIT_FIXES).
_CORRECTED_UNIT = {
    "degF_labelled_degC": {"degC": "degF"},
    "degC_labelled_degF": {"degF": "degC"},
    "K_labelled_degC": {"degC": "K"},
    "degC_labelled_K": {"K": "degC"},
    "gauge_logged_as_absolute": {"kPa": "kPa(g)", "bar": "bar(g)", "MPa": "MPa(g)", "psia": "psig"},
    "absolute_logged_as_gauge": {"kPa(g)": "kPa", "bar(g)": "bar", "MPa(g)": "MPa", "psig": "psia"},
}


@dataclass(frozen=True)
class PointSpec:
    """A configured point: role, unit string and where its values come from."""

    role: str
    unit: str
    mqtt_topic: str | None = None
    csv_column: str | None = None


@dataclass(frozen=True)
class UnitSpec:
    """What the site file says about a unit (the parts the commissioning check uses)."""

    id: str
    name: str
    kind: str
    refrigerant: str
    points: tuple[PointSpec, ...]

    @property
    def air_cooled(self) -> bool:
        return not any(p.role.startswith("condenser_water") for p in self.points)


@dataclass(frozen=True)
class CoverageRow:
    """Data coverage of one point over the report window."""

    role: str
    unit: str
    samples: int
    coverage: float  # share of grid instants with a value [-]
    interval_s: float  # median spacing of its own samples [s]
    first: str
    last: str


@dataclass
class UnitReport:
    """Everything shown for one unit.

    ``problems`` block detection on top of the checks' own blockers; ``notes`` only inform.
    """

    unit: UnitSpec
    result: asg.UnitCommissioning | None
    coverage: list[CoverageRow]
    grid_interval_s: float
    window: tuple[str, str]
    corrections_yaml: str
    cautions: list[str]
    problems: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def go(self) -> bool:
        return self.result is not None and self.result.go and not self.problems

    @property
    def blockers(self) -> list[str]:
        return self.problems + (self.result.blockers if self.result else [])


def _median_spacing_s(times: pd.DatetimeIndex) -> float:
    if len(times) < 2:
        return float("nan")
    return float(np.median(np.diff(times) / pd.Timedelta(1, "s")))


def sampling_interval_s(frame: pd.DataFrame) -> float:
    """The typical sampling interval [s]: the median over points of each point's median spacing."""
    spacings = [_median_spacing_s(frame.index[frame[c].notna().to_numpy()]) for c in frame]
    spacings = [s for s in spacings if np.isfinite(s)]
    return float(np.median(spacings)) if spacings else float("nan")


def align(frame: pd.DataFrame) -> tuple[pd.DataFrame, float]:
    """Readings of unsynchronised points put on one grid of the typical sampling interval.

    Each grid bin holds the mean of the samples inside it (label = bin start); compressor status
    becomes the share of "on" samples, read as on from 0.5. Returns the frame and the interval [s].
    """
    interval = sampling_interval_s(frame)
    if not np.isfinite(interval) or interval <= 0:
        return frame, interval
    step = pd.Timedelta(seconds=round(interval))
    return frame.resample(step).mean(), step.total_seconds()


def coverage_rows(raw: pd.DataFrame, grid: pd.DataFrame, spec: UnitSpec) -> list[CoverageRow]:
    rows = []
    for point in spec.points:
        values = raw[point.role] if point.role in raw else pd.Series(dtype=float)
        present = values.dropna()
        times = present.index
        spacing_s = _median_spacing_s(times)
        share = float(grid[point.role].notna().mean()) if point.role in grid and len(grid) else 0.0
        rows.append(
            CoverageRow(
                point.role,
                point.unit,
                len(present),
                share,
                spacing_s,
                times[0].isoformat() if len(times) else "-",
                times[-1].isoformat() if len(times) else "-",
            )
        )
    return rows


def cautions(refrigerant: str) -> list[str]:
    """The trade's usual cautions for work on this unit."""
    fluid = get_refrigerant(refrigerant)
    notes = [
        "This check is automated and reads sensor data only: confirm every finding on site before "
        "changing wiring or settings.",
        "The circuit holds refrigerant under pressure: connecting gauges, replacing transducers or "
        "opening the circuit is for licensed, certified refrigeration technicians, following local "
        "codes.",
        "Sensor wiring terminates in electrical panels: isolate and lock out power before opening "
        "them; qualified electricians only.",
    ]
    if fluid.flammable and not fluid.toxic:
        notes.append(
            f"{fluid.designation} is flammable (ASHRAE 34 class {fluid.safety_class}): no ignition "
            "sources near the circuit, tools and leak detectors rated for it, ventilation as "
            "local codes require."
        )
    if fluid.toxic:
        notes.append(
            f"{fluid.designation} (ammonia) is toxic and flammable (class {fluid.safety_class}): "
            "gas detection, ventilation, protective equipment and an emergency plan, as local "
            "codes require."
        )
    if fluid.designation == "R744":
        notes.append(
            "R744 (CO2) runs at very high pressures (above 100 bar on the high side; standstill "
            "pressure may exceed the low side's rating): gauges, hoses and relief devices rated "
            "for it."
        )
    return notes


def corrections_yaml(spec: UnitSpec, result: asg.UnitCommissioning) -> str:
    """The site-file changes the checks support, as a YAML snippet ('' when none)."""
    assignment = result.assignment
    changes: dict = {}
    if assignment.decisive:
        hypothesis = assignment.best.hypothesis
        points = []
        for point in spec.points:
            if point.role not in assignment.roles:
                continue
            role = hypothesis.role_of(point.role)
            fix = hypothesis.fix(point.role)
            if role == point.role and fix is None:
                continue
            entry = {"role": role, "unit": point.unit}
            if fix is not None:
                entry["unit"] = _CORRECTED_UNIT[fix].get(point.unit, f"<{fix}: no unit string>")
            for key in ("mqtt_topic", "csv_column"):
                if getattr(point, key):
                    entry[key] = getattr(point, key)
            points.append(entry)
        if points:
            changes["points"] = points
    check = result.refrigerant_check
    if check.verdict == "contradicts" and check.suggested:
        changes["refrigerant"] = check.suggested
    if not changes:
        return ""
    header = f"# unit {spec.id}: replace these entries (found by `rimewatch commission`)\n"
    if "refrigerant" in changes and check.equivalents:
        header += (
            f"# {', '.join(check.equivalents)} fit the data equally: read the nameplate first\n"
        )
    body = yaml.safe_dump({"id": spec.id, **changes}, sort_keys=False, default_flow_style=None)
    return header + body


def build_unit_report(spec: UnitSpec, raw: pd.DataFrame, atmospheric_pressure: float) -> UnitReport:
    """Run the commissioning checks on a unit's readings (SI, one column per role).

    Parameters
    ----------
    spec : the unit as configured.
    raw : readings by role, SI (Pa absolute, K), indexed by UTC time; not necessarily aligned.
    atmospheric_pressure : [Pa] at the site, for gauge/absolute mix-ups.
    """
    raw = raw.sort_index()
    grid, interval = align(raw) if len(raw) else (raw, float("nan"))
    coverage = coverage_rows(raw, grid, spec)
    window = (raw.index[0].isoformat(), raw.index[-1].isoformat()) if len(raw) else ("-", "-")
    notes = cautions(spec.refrigerant)
    if len(grid) < 2:
        problem = f"only {len(raw)} readings in the window: nothing can be checked"
        return UnitReport(spec, None, coverage, interval, window, "", notes, [problem])
    units = {p.role: p.unit for p in spec.points}
    result = asg.commission_unit(
        grid,
        spec.refrigerant,
        configured_units=units,
        atmospheric_pressure=atmospheric_pressure,
        air_cooled=spec.air_cooled,
    )
    return UnitReport(
        spec, result, coverage, interval, window, corrections_yaml(spec, result), notes
    )


def _environment() -> Environment:
    return Environment(
        loader=PackageLoader("rimewatch.report", "templates"),
        autoescape=select_autoescape(["html"]),
        trim_blocks=True,
        lstrip_blocks=True,
    )


def render_html(reports: list[UnitReport], site_name: str, generated_at: datetime) -> str:
    """One self-contained HTML page for the given unit reports."""
    template = _environment().get_template("commission.html")
    return template.render(
        reports=reports,
        site_name=site_name,
        generated_at=generated_at.isoformat(timespec="seconds"),
    )
