"""The refrigerants rimewatch supports: designations, CoolProp names, ASHRAE 34 safety classes.

Importing this module does not import CoolProp, so validating a site file stays fast.

References
----------
.. [1] ANSI/ASHRAE Standard 34-2022, "Designation and Safety Classification of Refrigerants".
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Refrigerant:
    """A supported refrigerant.

    Attributes
    ----------
    designation : ASHRAE 34 designation, e.g. ``"R410A"``.
    coolprop_name : CoolProp's fluid name.
    safety_class : ASHRAE 34 safety group (toxicity A/B, flammability 1, 2L, 2, 3) [1].
    blend : ``None`` for a single compound, else ``"azeotropic"``, ``"near-azeotropic"`` or
        ``"zeotropic"``; zeotropic blends have a temperature glide, so their dew and bubble points
        at one pressure differ.
    """

    designation: str
    coolprop_name: str
    safety_class: str
    blend: str | None = None

    @property
    def flammable(self) -> bool:
        """True for ASHRAE 34 flammability classes 2L, 2 and 3."""
        return self.safety_class[1:] != "1"

    @property
    def toxic(self) -> bool:
        """True for ASHRAE 34 toxicity class B (higher toxicity)."""
        return self.safety_class.startswith("B")

    @property
    def critical_temperature(self) -> float:
        """Critical temperature [K] (from CoolProp)."""
        from rimewatch.physics.refrigerant import critical_point

        return critical_point(self)[0]

    @property
    def critical_pressure(self) -> float:
        """Critical pressure [Pa] (from CoolProp)."""
        from rimewatch.physics.refrigerant import critical_point

        return critical_point(self)[1]


# Safety classes from ASHRAE 34 [1], Tables 4-1 and 4-2.
SUPPORTED: dict[str, Refrigerant] = {
    r.designation: r
    for r in (
        Refrigerant("R22", "R22", "A1"),
        Refrigerant("R32", "R32", "A2L"),
        Refrigerant("R134a", "R134a", "A1"),
        Refrigerant("R290", "n-Propane", "A3"),
        Refrigerant("R404A", "R404A", "A1", "near-azeotropic"),
        Refrigerant("R407C", "R407C", "A1", "zeotropic"),
        Refrigerant("R410A", "R410A", "A1", "near-azeotropic"),
        Refrigerant("R507A", "R507A", "A1", "azeotropic"),
        Refrigerant("R600a", "IsoButane", "A3"),
        Refrigerant("R717", "Ammonia", "B2L"),
        Refrigerant("R744", "CarbonDioxide", "A1"),
        Refrigerant("R1234yf", "R1234yf", "A2L"),
        Refrigerant("R1234ze(E)", "R1234ze(E)", "A2L"),
    )
}

_ALIASES = {
    "R1234ZE": "R1234ze(E)",
    "PROPANE": "R290",
    "ISOBUTANE": "R600a",
    "AMMONIA": "R717",
    "CO2": "R744",
    "CARBONDIOXIDE": "R744",
    "NPROPANE": "R290",
}


class UnsupportedRefrigerantError(ValueError):
    """Raised for a refrigerant name rimewatch cannot compute."""


def _normalise(name: str) -> str:
    return name.strip().upper().replace("-", "").replace(" ", "").replace("_", "")


_BY_KEY = {_normalise(d): r for d, r in SUPPORTED.items()}
_BY_KEY.update({_normalise(alias): SUPPORTED[d] for alias, d in _ALIASES.items()})


def get_refrigerant(name: str | Refrigerant) -> Refrigerant:
    """Look up a supported refrigerant by designation (``"R410A"``, ``"R-410A"``, ``"r410a"``).

    Raises
    ------
    UnsupportedRefrigerantError
        When the name is not supported; the message lists the supported designations.
    """
    if isinstance(name, Refrigerant):
        return name
    found = _BY_KEY.get(_normalise(str(name)))
    if found is None:
        raise UnsupportedRefrigerantError(
            f"refrigerant {name!r} is not supported; supported: {', '.join(SUPPORTED)}"
        )
    return found
