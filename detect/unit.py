"""What detection needs to know about a unit (its equipment description), as a plain object.

Built by the shell from the unit block of the site file (stored as JSON in ``units.description``)
or by tests and benchmarks from a simulated unit. SI inside: W, K, m^3/s, Pa.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from rimewatch.physics.compressor import CompressorMap

EXPANSION_DEVICES = ("txv", "eev", "fixed_orifice")


@dataclass(frozen=True)
class UnitInfo:
    """One refrigeration circuit as detection sees it.

    Attributes
    ----------
    key : the unit's id in the site file (used in events and reports).
    refrigerant : a supported refrigerant name.
    expansion_device : ``"txv"``, ``"eev"`` or ``"fixed_orifice"``.
    kind : design.md unit kind.
    nominal_capacity_W : rated cooling capacity [W].
    superheat_target_K, subcooling_target_K : design targets [K]; None when not given.
    compressor_map : for mass flow, capacity and the volumetric-efficiency ratio; optional.
    condenser_airflow_m3_s, evaporator_airflow_m3_s : design airflows [m^3/s]; optional.
    atmospheric_pressure : at the site [Pa] (psychrometrics).
    """

    key: str
    refrigerant: str
    expansion_device: str
    kind: str = "rooftop_unit"
    nominal_capacity_W: float | None = None
    superheat_target_K: float | None = None
    subcooling_target_K: float | None = None
    compressor_map: CompressorMap | None = None
    condenser_airflow_m3_s: float | None = None
    evaporator_airflow_m3_s: float | None = None
    atmospheric_pressure: float = 101325.0

    def __post_init__(self):
        if self.expansion_device not in EXPANSION_DEVICES:
            raise ValueError(
                f"unit {self.key}: expansion device {self.expansion_device!r} is not one of "
                f"{', '.join(EXPANSION_DEVICES)}"
            )

    @property
    def holds_superheat(self) -> bool:
        """True for thermostatic and electronic valves (superheat is controlled)."""
        return self.expansion_device in ("txv", "eev")

    @classmethod
    def from_description(
        cls, description: Mapping, atmospheric_pressure: float = 101325.0
    ) -> UnitInfo:
        """From a unit block of the site file (the JSON stored in ``units.description``)."""
        cmap = description.get("compressor_map")
        capacity_kW = description.get("nominal_capacity_kW")
        return cls(
            key=str(description["id"]),
            refrigerant=description["refrigerant"],
            expansion_device=description["expansion_device"],
            kind=description.get("kind", "rooftop_unit"),
            nominal_capacity_W=None if capacity_kW is None else 1000.0 * float(capacity_kW),
            superheat_target_K=description.get("superheat_target_K"),
            subcooling_target_K=description.get("subcooling_target_K"),
            compressor_map=CompressorMap.from_dict(cmap) if cmap else None,
            condenser_airflow_m3_s=description.get("condenser_airflow_m3_s"),
            evaporator_airflow_m3_s=description.get("evaporator_airflow_m3_s"),
            atmospheric_pressure=atmospheric_pressure,
        )
