"""The site description: one YAML file per site, validated into :class:`SiteConfig`.

A site has a name, a time zone, an elevation (for gauge pressures) and a display preference; its
units (refrigeration circuits, design.md "Equipment description") each list their points: a role
from design.md's point roles, the unit the values arrive in, and where they come from (an MQTT
topic and/or a CSV column). ``load_site`` turns every problem into one :class:`SiteConfigError`
whose lines name the file, the field path (``units[1].points[0].unit``) and what is wrong.
See docs/store.md for the reference.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any, Literal
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import yaml
from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    PrivateAttr,
    ValidationError,
    field_validator,
    model_validator,
)

from rimewatch.ingest.units import UnitError, atmospheric_pressure, canonical_unit, unit_kind
from rimewatch.physics.catalogue import get_refrigerant

UnitKind = Literal["rooftop_unit", "split_system", "cold_room_condensing_unit", "chiller_circuit"]
ExpansionDevice = Literal["txv", "eev", "fixed_orifice"]

_PRESSURE = ("pressure",)
_TEMPERATURE = ("temperature",)
_FLOW = ("mass_flow", "volume_flow")
# Point roles (design.md) -> the kinds of unit their values may arrive in.
ROLE_UNIT_KINDS: dict[str, tuple[str, ...]] = {
    "suction_pressure": _PRESSURE,
    "discharge_pressure": _PRESSURE,
    "liquid_pressure": _PRESSURE,
    "suction_temp": _TEMPERATURE,
    "discharge_temp": _TEMPERATURE,
    "liquid_temp": _TEMPERATURE,
    "evaporator_outlet_temp": _TEMPERATURE,
    "outdoor_air_temp": _TEMPERATURE,
    "condenser_leaving_air_temp": _TEMPERATURE,
    "return_air_temp": _TEMPERATURE,
    "return_air_humidity": ("fraction",),
    "supply_air_temp": _TEMPERATURE,
    "box_temp": _TEMPERATURE,
    "chilled_water_supply_temp": _TEMPERATURE,
    "chilled_water_return_temp": _TEMPERATURE,
    "chilled_water_flow": _FLOW,
    "condenser_water_supply_temp": _TEMPERATURE,
    "condenser_water_return_temp": _TEMPERATURE,
    "condenser_water_flow": _FLOW,
    "compressor_power": ("power",),
    "compressor_current": ("current",),
    "compressor_status": ("status",),
    "compressor_speed": ("frequency", "fraction"),
    "fan_status": ("status",),
}
ROLES = tuple(ROLE_UNIT_KINDS)

_KEY = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


class SiteConfigError(ValueError):
    """A site file that cannot be read or does not validate; the message says where and what."""


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", str_strip_whitespace=True)


class SiteInfo(_Strict):
    name: str = Field(min_length=1, max_length=200)
    timezone: str = "UTC"
    elevation_m: float = Field(default=0.0, ge=-2000.0, le=11000.0)
    display_units: Literal["SI", "IP"] = "SI"

    @field_validator("timezone")
    @classmethod
    def _known_zone(cls, value: str) -> str:
        return _check_zone(value)


class CsvSettings(_Strict):
    """How the site's trend-log exports are written."""

    timestamp_column: str = "timestamp"
    timestamp_format: str | None = None  # strftime codes; None = ISO 8601
    timezone: str | None = None  # zone of timestamps without an offset; None = the site's
    delimiter: str = Field(default=",", min_length=1, max_length=1)
    decimal: str = Field(default=".", min_length=1, max_length=1)
    encoding: str = "utf-8"
    missing_values: list[str] = Field(default_factory=lambda: ["", "-", "--"])
    chunk_rows: int = Field(default=50_000, ge=100)

    @field_validator("timezone")
    @classmethod
    def _known_zone(cls, value: str | None) -> str | None:
        return None if value is None else _check_zone(value)


class PointConfig(_Strict):
    role: str
    unit: str
    mqtt_topic: str | None = Field(default=None, min_length=1)
    csv_column: str | None = Field(default=None, min_length=1)

    @field_validator("role")
    @classmethod
    def _known_role(cls, value: str) -> str:
        if value not in ROLE_UNIT_KINDS:
            raise ValueError(f"unknown role {value!r}; roles: {', '.join(ROLES)}")
        return value

    @field_validator("unit")
    @classmethod
    def _known_unit(cls, value: str) -> str:
        try:
            return canonical_unit(value)
        except UnitError as exc:
            raise ValueError(str(exc)) from None

    @model_validator(mode="after")
    def _unit_fits_role(self) -> PointConfig:
        kinds = ROLE_UNIT_KINDS[self.role]
        kind = unit_kind(self.unit)
        if kind not in kinds:
            raise ValueError(
                f"unit {self.unit!r} measures {kind.replace('_', ' ')}, "
                f"but role {self.role!r} needs {' or '.join(k.replace('_', ' ') for k in kinds)}"
            )
        if self.mqtt_topic is None and self.csv_column is None:
            raise ValueError("give the point a source: mqtt_topic, csv_column or both")
        return self


class UnitConfig(_Strict):
    id: str = Field(min_length=1, max_length=100)
    name: str = Field(min_length=1, max_length=200)
    kind: UnitKind
    refrigerant: str
    expansion_device: ExpansionDevice
    nominal_capacity_kW: float = Field(gt=0)
    superheat_target_K: float | None = Field(default=None, gt=0, le=60)
    subcooling_target_K: float | None = Field(default=None, gt=0, le=60)
    condenser_airflow_m3_s: float | None = Field(default=None, gt=0)
    evaporator_airflow_m3_s: float | None = Field(default=None, gt=0)
    # Checked by rimewatch.physics.compressor when it is used; kept as given here.
    compressor_map: dict[str, Any] | None = None
    compressor_map_file: str | None = None
    points: list[PointConfig] = Field(min_length=1)

    @field_validator("id")
    @classmethod
    def _key_shape(cls, value: str) -> str:
        if not _KEY.match(value):
            raise ValueError(
                f"unit id {value!r} may hold letters, digits, '.', '_' and '-' only "
                "(it names points as '<unit id>/<role>')"
            )
        return value

    @field_validator("refrigerant")
    @classmethod
    def _supported_refrigerant(cls, value: str) -> str:
        return get_refrigerant(value).designation

    @field_validator("points")
    @classmethod
    def _one_point_per_role(cls, points: list[PointConfig]) -> list[PointConfig]:
        seen: set[str] = set()
        for point in points:
            if point.role in seen:
                raise ValueError(f"role {point.role!r} is given twice; one point per role")
            seen.add(point.role)
        return points

    @model_validator(mode="after")
    def _one_map(self) -> UnitConfig:
        if self.compressor_map is not None and self.compressor_map_file is not None:
            raise ValueError("give compressor_map or compressor_map_file, not both")
        return self

    def point(self, role: str) -> PointConfig | None:
        return next((p for p in self.points if p.role == role), None)


class SiteConfig(_Strict):
    site: SiteInfo
    csv: CsvSettings = Field(default_factory=CsvSettings)
    units: list[UnitConfig] = Field(min_length=1)
    _path: Path | None = PrivateAttr(default=None)

    @field_validator("units")
    @classmethod
    def _unique_sources(cls, units: list[UnitConfig]) -> list[UnitConfig]:
        unit_ids: set[str] = set()
        topics: dict[str, str] = {}
        columns: dict[str, str] = {}
        for unit in units:
            if unit.id in unit_ids:
                raise ValueError(f"unit id {unit.id!r} is used twice")
            unit_ids.add(unit.id)
            for point in unit.points:
                name = f"{unit.id}/{point.role}"
                for value, owners, what in (
                    (point.mqtt_topic, topics, "mqtt_topic"),
                    (point.csv_column, columns, "csv_column"),
                ):
                    if value is None:
                        continue
                    if value in owners:
                        raise ValueError(f"{what} {value!r} is given to {owners[value]} and {name}")
                    owners[value] = name
        return units

    @property
    def path(self) -> Path | None:
        """The file this configuration was loaded from."""
        return self._path

    @property
    def csv_timezone(self) -> str:
        """Zone of CSV timestamps without an offset."""
        return self.csv.timezone or self.site.timezone

    @property
    def atmospheric_pressure_Pa(self) -> float:
        """Standard-atmosphere pressure at the site's elevation [Pa] (ISO 2533), for gauge units."""
        return float(atmospheric_pressure(self.site.elevation_m))

    def unit(self, unit_id: str) -> UnitConfig:
        for unit in self.units:
            if unit.id == unit_id:
                return unit
        known = ", ".join(u.id for u in self.units)
        raise KeyError(f"unit {unit_id!r} is not in the site file (units: {known})")

    def compressor_map_for(self, unit: UnitConfig) -> dict[str, Any] | None:
        """The unit's compressor map block, read from ``compressor_map_file`` (relative to the site
        file) when given that way."""
        if unit.compressor_map_file is None:
            return unit.compressor_map
        base = self._path.parent if self._path else Path.cwd()
        map_path = base / unit.compressor_map_file
        where = f"units[{self.units.index(unit)}].compressor_map_file"
        try:
            loaded = yaml.safe_load(map_path.read_text(encoding="utf-8"))
        except OSError as exc:
            raise SiteConfigError(f"{self._path}: {where}: cannot read {map_path}: {exc}") from None
        except yaml.YAMLError as exc:
            raise SiteConfigError(f"{self._path}: {where}: {map_path} is not YAML: {exc}") from None
        if not isinstance(loaded, dict):
            raise SiteConfigError(f"{self._path}: {where}: {map_path} must hold a mapping")
        return loaded


def _check_zone(value: str) -> str:
    try:
        ZoneInfo(value)
    except (ZoneInfoNotFoundError, ValueError):
        raise ValueError(
            f"unknown time zone {value!r}; use an IANA name such as 'Europe/Berlin' or 'UTC'"
        ) from None
    return value


def _field_path(location: tuple) -> str:
    text = ""
    for part in location:
        if isinstance(part, int):
            text += f"[{part}]"
        elif part.startswith("function-") or part.startswith("literal["):
            continue
        else:
            text += f".{part}" if text else part
    return text or "(top level)"


def _describe(error: dict) -> str:
    kind = error["type"]
    if kind == "missing":
        return "required field is missing"
    if kind == "extra_forbidden":
        return "unknown field (check the spelling; see docs/store.md)"
    message = error["msg"].removeprefix("Value error, ")
    if kind in (
        "literal_error",
        "float_parsing",
        "greater_than",
        "less_than_equal",
        "greater_than_equal",
        "less_than",
        "string_type",
        "int_parsing",
    ):
        message += f" (got {error.get('input')!r})"
    return message


def _yaml_line(node: yaml.Node | None, location: tuple) -> int | None:
    """The 1-based line of the deepest YAML node along a pydantic error location."""
    line = None
    for part in location:
        if node is None:
            break
        line = node.start_mark.line + 1
        if isinstance(node, yaml.MappingNode) and isinstance(part, str):
            node = next((v for k, v in node.value if k.value == part), None)
            if node is None:  # an unknown or missing key: point at the key, else the parent
                break
        elif isinstance(node, yaml.SequenceNode) and isinstance(part, int):
            node = node.value[part] if part < len(node.value) else None
    if node is not None:
        line = node.start_mark.line + 1
    return line


def format_validation_error(
    path: Path | str, error: ValidationError, root: yaml.Node | None = None
) -> str:
    """One line per problem: ``FILE: field.path: what is wrong (line N)``."""
    lines = []
    for problem in error.errors():
        line = _yaml_line(root, problem["loc"]) if root is not None else None
        where = f" (line {line})" if line else ""
        lines.append(f"{path}: {_field_path(problem['loc'])}: {_describe(problem)}{where}")
    return "\n".join(lines)


def parse_site(
    document: Any, path: Path | str = "<site>", root: yaml.Node | None = None
) -> SiteConfig:
    """Validate an already-parsed YAML document (``root``: its node tree, for line numbers)."""
    if not isinstance(document, dict):
        raise SiteConfigError(f"{path}: the file must hold a mapping with 'site' and 'units'")
    try:
        config = SiteConfig.model_validate(document)
    except ValidationError as exc:
        raise SiteConfigError(format_validation_error(path, exc, root)) from None
    config._path = Path(path)
    return config


def load_site(path: Path | str) -> SiteConfig:
    """Read and validate a site file.

    Raises
    ------
    SiteConfigError
        When the file is missing, is not YAML, or does not validate.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise SiteConfigError(f"{path}: cannot read the site file: {exc.strerror}") from None
    try:
        document = yaml.safe_load(text)
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark else ""
        problem = getattr(exc, "problem", None) or str(exc)
        raise SiteConfigError(f"{path}: {where}not valid YAML: {problem}") from None
    return parse_site(document, path, root)


def safety_notes(config: SiteConfig) -> list[str]:
    """The trade's usual cautions for the refrigerants a site uses, one line each."""
    notes = []
    for designation in sorted({u.refrigerant for u in config.units}):
        refrigerant = get_refrigerant(designation)
        if refrigerant.flammable:
            notes.append(
                f"{designation} is flammable (ASHRAE 34 class {refrigerant.safety_class}): "
                "no ignition sources, use tools rated for it, leak checks and recovery by "
                "certified technicians under local codes."
            )
        if refrigerant.toxic:
            notes.append(
                f"{designation} is toxic (class {refrigerant.safety_class}): detection, "
                "ventilation and protective equipment as local codes require."
            )
        if designation == "R744":
            notes.append(
                "R744 (CO2) works at very high pressures (above 100 bar on the high side; "
                "standstill pressure can exceed the low side's rating): gauges, hoses and relief "
                "devices rated for it, and only trained technicians."
            )
    if notes:
        notes.append(
            "All work on pressurised refrigerant circuits and electrical panels is for licensed, "
            "certified technicians; local codes come first."
        )
    return notes
