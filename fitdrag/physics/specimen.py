"""Specimens: mass, size, frontal area, volume and added-mass coefficient.

Two shapes of description are offered: :class:`Sphere` (from mass and diameter) and
:class:`Body` (any shape, from mass, frontal area and volume).  Both expose the same
attributes, which is all the physics needs: ``mass`` [kg], ``area`` [m²], ``volume``
[m³], ``length`` (the reference length of the Reynolds number) [m] and
``added_mass_coefficient`` [-].

References
----------
1. H. Lamb, *Hydrodynamics*, 6th ed., Cambridge University Press, 1932, §92: the added
   mass of a sphere in an ideal fluid is half the mass of the displaced fluid
   (coefficient 0.5).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from fitdrag._checks import positive_number as _positive
from fitdrag.errors import InputError


def _added_mass(value: float) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(
            f"added_mass_coefficient: expected a number, got {value!r}; use 0.5 for a sphere, "
            f"0 to neglect added mass."
        ) from None
    if not math.isfinite(v) or v < 0:
        raise InputError(
            f"added_mass_coefficient: must be finite and >= 0, got {value!r}; use 0.5 for a "
            f"sphere, 0 to neglect added mass."
        )
    return v


@dataclass(frozen=True)
class Sphere:
    """A sphere described by its mass and diameter.

    Parameters
    ----------
    mass : float
        Specimen mass. [kg]
    diameter : float
        Sphere diameter; also the reference length of the Reynolds number. [m]
    added_mass_coefficient : float
        Added mass as a fraction of the displaced air's mass; 0.5 for a sphere [1]. [-]
    """

    mass: float
    diameter: float
    added_mass_coefficient: float = 0.5

    def __post_init__(self) -> None:
        object.__setattr__(
            self, "mass", _positive("mass", self.mass, "kg", "give the specimen mass in kg.")
        )
        object.__setattr__(
            self,
            "diameter",
            _positive("diameter", self.diameter, "m", "give the sphere diameter in metres."),
        )
        object.__setattr__(self, "added_mass_coefficient", _added_mass(self.added_mass_coefficient))

    @property
    def area(self) -> float:
        """Frontal area π d²/4. [m²]"""
        return math.pi * self.diameter**2 / 4.0

    @property
    def volume(self) -> float:
        """Volume π d³/6. [m³]"""
        return math.pi * self.diameter**3 / 6.0

    @property
    def length(self) -> float:
        """Reference length of the Reynolds number: the diameter. [m]"""
        return self.diameter

    def to_dict(self) -> dict:
        return {
            "shape": "sphere",
            "mass": self.mass,
            "diameter": self.diameter,
            "area": self.area,
            "volume": self.volume,
            "added_mass_coefficient": self.added_mass_coefficient,
        }


@dataclass(frozen=True)
class Body:
    """A specimen of any shape described by mass, frontal area and volume.

    Parameters
    ----------
    mass : float
        Specimen mass. [kg]
    area : float
        Frontal (reference) area used in the drag and lift forces. [m²]
    volume : float
        Volume, for buoyancy and added mass. [m³]
    length : float, optional
        Reference length of the Reynolds number; defaults to the diameter of the circle of
        the same area, sqrt(4 A / π). [m]
    added_mass_coefficient : float
        Added mass as a fraction of the displaced air's mass. [-]
    """

    mass: float
    area: float
    volume: float
    length: float | None = None
    added_mass_coefficient: float = 0.5

    def __post_init__(self) -> None:
        object.__setattr__(
            self, "mass", _positive("mass", self.mass, "kg", "give the specimen mass in kg.")
        )
        object.__setattr__(
            self,
            "area",
            _positive("area", self.area, "m²", "give the frontal area in square metres."),
        )
        object.__setattr__(
            self,
            "volume",
            _positive("volume", self.volume, "m³", "give the specimen volume in cubic metres."),
        )
        if self.length is None:
            object.__setattr__(self, "length", math.sqrt(4.0 * self.area / math.pi))
        else:
            object.__setattr__(
                self,
                "length",
                _positive("length", self.length, "m", "give the Reynolds reference length."),
            )
        object.__setattr__(self, "added_mass_coefficient", _added_mass(self.added_mass_coefficient))

    def to_dict(self) -> dict:
        return {
            "shape": "body",
            "mass": self.mass,
            "area": self.area,
            "volume": self.volume,
            "length": self.length,
            "added_mass_coefficient": self.added_mass_coefficient,
        }


Specimen = Sphere | Body
