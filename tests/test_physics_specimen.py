"""Tests of fitdrag.physics.specimen: sphere and general-body geometry, defaults and validation.

Oracles: the Euclidean formulas for a sphere (area of a great circle π d²/4, volume π d³/6),
the equal-area circle diameter sqrt(4 A / π), and the added-mass coefficient ½ of a sphere
(H. Lamb, Hydrodynamics, 6th ed., 1932, §92).  Every validation message is asserted in full.
"""

from __future__ import annotations

import dataclasses
import math
import re

import pytest

from fitdrag.physics.specimen import Body, Sphere


def _exact(message: str) -> str:
    """A pattern matching exactly ``message`` (pytest.raises uses re.search)."""
    return "^" + re.escape(message) + "$"


# ----------------------------------------------------------------------------- geometry


@pytest.mark.parametrize("diameter", [0.001, 0.04, 0.0667, 0.22, 1.5])
def test_sphere_area_and_volume(diameter):
    """closed-form/independent: great-circle area π r² and sphere volume 4/3 π r³ with
    r = d/2 (Archimedes, On the Sphere and Cylinder; any table of mensuration formulas, from
    memory), written from the radius so that the check does not repeat the code's expression."""
    s = Sphere(mass=0.0027, diameter=diameter)
    r = diameter / 2.0
    assert s.area == pytest.approx(math.pi * r * r, rel=1e-15)
    assert s.volume == pytest.approx(4.0 / 3.0 * math.pi * r**3, rel=1e-15)
    assert s.length == diameter


def test_table_tennis_ball_numbers():
    """closed-form/independent: a table-tennis ball (40 mm, 2.7 g per ITTF Technical Leaflet T3,
    'The Ball') has frontal area 1.2566e-3 m² and volume 3.3510e-5 m³ (π·0.02² and
    4/3·π·0.02³ worked by hand to 5 figures)."""
    s = Sphere(0.0027, 0.040)
    assert s.area == pytest.approx(1.2566e-3, rel=5e-5)
    assert s.volume == pytest.approx(3.3510e-5, rel=5e-5)


def test_sphere_default_added_mass_is_lamb_half():
    """published-value: added-mass coefficient of a sphere ½ (Lamb 1932, §92)."""
    assert Sphere(0.0027, 0.04).added_mass_coefficient == 0.5
    assert Body(0.0027, 1e-3, 3e-5).added_mass_coefficient == 0.5


def test_added_mass_zero_allowed():
    """regression: 0 neglects added mass and is accepted (issue 2, item 4)."""
    assert Sphere(0.0027, 0.04, added_mass_coefficient=0).added_mass_coefficient == 0.0
    assert Body(1.0, 1.0, 1.0, added_mass_coefficient=0.0).added_mass_coefficient == 0.0


@pytest.mark.parametrize("area", [1e-4, 1.2566e-3, 0.05, 2.0])
def test_body_default_length_is_equal_area_circle_diameter(area):
    """closed-form/independent: the diameter of the circle of area A is d with π d²/4 = A,
    i.e. d = 2 sqrt(A/π) = sqrt(4A/π); checked by recomputing the circle's area from d."""
    b = Body(mass=0.01, area=area, volume=1e-5)
    assert math.pi * b.length**2 / 4.0 == pytest.approx(area, rel=1e-14)
    assert b.length == pytest.approx(2.0 * math.sqrt(area / math.pi), rel=1e-15)


def test_body_of_sphere_matches_sphere():
    """closed-form/independent: a Body given a sphere's area and volume has the sphere's
    diameter as its default reference length."""
    s = Sphere(0.058, 0.0667)
    b = Body(0.058, s.area, s.volume)
    assert b.length == pytest.approx(s.diameter, rel=1e-15)


def test_body_explicit_length_kept():
    """regression: an explicit reference length is kept as given."""
    assert Body(0.01, 0.002, 1e-5, length=0.3).length == 0.3


def test_values_are_converted_to_float():
    """regression: integer and string-number inputs are stored as floats."""
    s = Sphere(1, 2)
    assert isinstance(s.mass, float) and isinstance(s.diameter, float)
    b = Body("0.5", 1, 2, 3, 1)
    assert (b.mass, b.area, b.volume, b.length, b.added_mass_coefficient) == (
        0.5,
        1.0,
        2.0,
        3.0,
        1.0,
    )
    assert all(isinstance(v, float) for v in (b.mass, b.area, b.volume, b.length))


def test_frozen():
    """regression: specimens are frozen dataclasses (inputs never change under a fit)."""
    s = Sphere(0.0027, 0.04)
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.mass = 1.0  # type: ignore[misc]
    b = Body(0.0027, 1e-3, 3e-5)
    with pytest.raises(dataclasses.FrozenInstanceError):
        b.area = 1.0  # type: ignore[misc]


def test_to_dict():
    """regression: the dictionaries written to results and records."""
    s = Sphere(0.0027, 0.04, 0.4)
    assert s.to_dict() == {
        "shape": "sphere",
        "mass": 0.0027,
        "diameter": 0.04,
        "area": s.area,
        "volume": s.volume,
        "added_mass_coefficient": 0.4,
    }
    b = Body(0.01, 0.002, 1e-5, length=0.3, added_mass_coefficient=0.0)
    assert b.to_dict() == {
        "shape": "body",
        "mass": 0.01,
        "area": 0.002,
        "volume": 1e-5,
        "length": 0.3,
        "added_mass_coefficient": 0.0,
    }


# ----------------------------------------------------------------------------- validation

_MASS_HINT = "give the specimen mass in kg."
_DIAM_HINT = "give the sphere diameter in metres."


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        (
            {"mass": "abc", "diameter": 0.04},
            f"mass: expected a number in kg, got 'abc'; {_MASS_HINT}",
        ),
        (
            {"mass": None, "diameter": 0.04},
            f"mass: expected a number in kg, got None; {_MASS_HINT}",
        ),
        (
            {"mass": -1, "diameter": 0.04},
            f"mass: must be a finite number > 0 kg, got -1; {_MASS_HINT}",
        ),
        (
            {"mass": 0.0, "diameter": 0.04},
            f"mass: must be a finite number > 0 kg, got 0.0; {_MASS_HINT}",
        ),
        (
            {"mass": math.nan, "diameter": 0.04},
            f"mass: must be a finite number > 0 kg, got nan; {_MASS_HINT}",
        ),
        (
            {"mass": math.inf, "diameter": 0.04},
            f"mass: must be a finite number > 0 kg, got inf; {_MASS_HINT}",
        ),
        (
            {"mass": 0.0027, "diameter": 0},
            f"diameter: must be a finite number > 0 m, got 0; {_DIAM_HINT}",
        ),
        (
            {"mass": 0.0027, "diameter": -0.04},
            f"diameter: must be a finite number > 0 m, got -0.04; {_DIAM_HINT}",
        ),
        (
            {"mass": 0.0027, "diameter": "40mm"},
            f"diameter: expected a number in m, got '40mm'; {_DIAM_HINT}",
        ),
        (
            {"mass": 0.0027, "diameter": 0.04, "added_mass_coefficient": -0.1},
            "added_mass_coefficient: must be finite and >= 0, got -0.1; use 0.5 for a sphere, "
            "0 to neglect added mass.",
        ),
        (
            {"mass": 0.0027, "diameter": 0.04, "added_mass_coefficient": math.nan},
            "added_mass_coefficient: must be finite and >= 0, got nan; use 0.5 for a sphere, "
            "0 to neglect added mass.",
        ),
        (
            {"mass": 0.0027, "diameter": 0.04, "added_mass_coefficient": "half"},
            "added_mass_coefficient: expected a number, got 'half'; use 0.5 for a sphere, "
            "0 to neglect added mass.",
        ),
    ],
)
def test_sphere_validation_messages(kwargs, message):
    """regression: each bad sphere input raises ValueError naming the input, the value and the
    fix (project rule: exact, actionable errors)."""
    with pytest.raises(ValueError, match=_exact(message)):
        Sphere(**kwargs)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        (
            {"mass": -0.5, "area": 1e-3, "volume": 1e-5},
            f"mass: must be a finite number > 0 kg, got -0.5; {_MASS_HINT}",
        ),
        (
            {"mass": 0.01, "area": 0, "volume": 1e-5},
            "area: must be a finite number > 0 m², got 0; give the frontal area in square metres.",
        ),
        (
            {"mass": 0.01, "area": "big", "volume": 1e-5},
            "area: expected a number in m², got 'big'; give the frontal area in square metres.",
        ),
        (
            {"mass": 0.01, "area": 1e-3, "volume": -1},
            "volume: must be a finite number > 0 m³, got -1; give the specimen volume in cubic "
            "metres.",
        ),
        (
            {"mass": 0.01, "area": 1e-3, "volume": math.inf},
            "volume: must be a finite number > 0 m³, got inf; give the specimen volume in cubic "
            "metres.",
        ),
        (
            {"mass": 0.01, "area": 1e-3, "volume": 1e-5, "length": 0},
            "length: must be a finite number > 0 m, got 0; give the Reynolds reference length.",
        ),
        (
            {"mass": 0.01, "area": 1e-3, "volume": 1e-5, "length": "long"},
            "length: expected a number in m, got 'long'; give the Reynolds reference length.",
        ),
        (
            {"mass": 0.01, "area": 1e-3, "volume": 1e-5, "added_mass_coefficient": -1},
            "added_mass_coefficient: must be finite and >= 0, got -1; use 0.5 for a sphere, "
            "0 to neglect added mass.",
        ),
    ],
)
def test_body_validation_messages(kwargs, message):
    """regression: each bad body input raises ValueError naming the input, the value and the
    fix (project rule: exact, actionable errors)."""
    with pytest.raises(ValueError, match=_exact(message)):
        Body(**kwargs)
