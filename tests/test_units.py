"""Tests of fitdrag.units: the one quantity parser of command-line options and job files.

Oracles: published definitions, not pint's tables —
- BIPM, The International System of Units (SI Brochure), 9th ed., 2019: the prefixes
  (hecto = 1e2, milli = 1e-3, kilo = 1e3, Table 7), the Celsius temperature
  t/°C = T/K − 273.15 (§2.3.1) and a temperature difference of 1 °C equal to 1 K;
- the international yard and pound agreement (1959): 1 lb = 0.45359237 kg and
  1 in = 0.0254 m exactly.
"""

from __future__ import annotations

import pytest

from fitdrag.units import parse_quantity, unit_registry, unit_symbol, unit_word


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [("1 hPa", "Pa", 100.0),  # hecto = 1e2 (SI Brochure, Table 7)
     ("1008hPa", "Pa", 100800.0),
     ("40mm", "m", 0.040),  # milli = 1e-3
     ("2.7 g", "kg", 0.0027),
     ("1 lb", "kg", 0.45359237),  # international pound (1959)
     ("1 inch", "m", 0.0254),  # international inch (1959)
     ("28.8 km/h", "m/s", 8.0),  # 28.8 km / 3600 s
     ("21 degC", "degC", 21.0),
     ("21degC", "degC", 21.0),
     ("294.15 K", "degC", 21.0),  # t/°C = T/K - 273.15 (SI Brochure §2.3.1)
     ("0 degC", "K", 273.15)],
)  # fmt: skip
def test_published_conversions(text, unit, expected):
    """published-value: conversions of the SI Brochure (2019) and the 1959 yard and pound
    agreement (exact by definition; floating-point arithmetic may differ in the last bit,
    hence rel 1e-14)."""
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-14, abs=1e-12)


def test_a_celsius_step_is_a_kelvin():
    """published-value: a temperature difference of 1 °C is 1 K (SI Brochure §2.3.1); with
    ``delta`` a Celsius step is not shifted by 273.15."""
    assert parse_quantity("1 degC", "delta_degC", delta=True) == pytest.approx(1.0, rel=1e-14)
    assert parse_quantity("0.3 degC", "K", delta=True) == pytest.approx(0.3, rel=1e-14)
    assert parse_quantity("1 K", "delta_degC", delta=True) == pytest.approx(1.0, rel=1e-14)


@pytest.mark.parametrize("text", ["0.0027", " 0.0027 ", "2.7e-3", "+2.7E-3"])
def test_a_bare_number_is_taken_in_the_target_unit(text):
    """closed-form/independent: a number without a unit is returned as it is (float())."""
    assert parse_quantity(text, "kg") == float(text)


@pytest.mark.parametrize(
    ("text", "unit", "message"),
    [("2.7zz", "kg", "unknown unit 'zz'"),
     ("40mm", "kg", "unit 'mm' is not a unit of mass"),
     ("21 furlong", "degC", "unit 'furlong' is not a unit of temperature"),
     ("g", "kg", "expected a number followed by a unit"),
     ("", "kg", "expected a number followed by a unit")],
)  # fmt: skip
def test_bad_text_raises_value_error_with_the_reason(text, unit, message):
    """regression: unknown units, units of another quantity and missing numbers raise a
    ValueError with a short reason (the caller names the input)."""
    with pytest.raises(ValueError, match=message):
        parse_quantity(text, unit)


def test_one_registry():
    """regression: the package has one unit registry (created once, on first use)."""
    assert unit_registry() is unit_registry()


def test_words_and_symbols_for_messages():
    """regression: what a unit measures and how it is printed, for messages."""
    assert unit_word("kg") == "mass"
    assert unit_word("degC") == "temperature"
    assert unit_symbol("m**2") == "m²"
    assert unit_symbol("degC") == "°C"
    assert unit_word("furlong") == "furlong"  # unknown units are named as they are
