"""Unit conversion against the DICOM-defined units (PS3.16 UCUM codes; PS3.3 header units).

Worked values: 0.0042 Gy.m2 = 42 Gy.cm2 (1 m2 = 1e4 cm2, exact); (0018,115E) 420 dGy.cm2 =
42 Gy.cm2 (PS3.3 C.8.7.8: dGy.cm2; 1 dGy = 0.1 Gy); 1 uGy.m2 = 1 cGy.cm2 = 0.01 Gy.cm2.
"""

import pytest

from pipeline.units import Quantity, UnitError, convert


@pytest.mark.parametrize("value, unit, quantity, expected", [
    (0.0042, "Gy.m2", Quantity.DAP, 42.0),
    (420.0, "dGy.cm2", Quantity.DAP, 42.0),
    (1.0, "uGy.m2", Quantity.DAP, 0.01),
    (1.0, "cGy.cm2", Quantity.DAP, 0.01),
    (13639.0, "mGy.cm2", Quantity.DAP, 13.639),   # HL7 FHIR Radiation Dose Summary example unit
    (1e-5, "Gy.m2", Quantity.DAP, 0.1),           # UK chest PA DAP reference dose 0.1 Gy cm2
    (6.2, "Gy", Quantity.AIR_KERMA, 6200.0),
    (3.0, "dGy", Quantity.AIR_KERMA, 300.0),
    (350.2, "mGy.cm", Quantity.DLP, 350.2),
    (1.2, "Gy.cm", Quantity.DLP, 1200.0),
    (1500.0, "ms", Quantity.TIME, 1.5),
    (2.5, "min", Quantity.TIME, 150.0),
    (0.043, "m2", Quantity.AREA, 430.0),
    (250000.0, "uA.s", Quantity.CHARGE, 250.0),
    (28.0, "cm", Quantity.LENGTH, 280.0),
])
def test_conversion_to_canonical_units(value, unit, quantity, expected):
    assert convert(value, unit, quantity) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("unit, quantity", [
    ("mGy*cm", Quantity.DLP),     # not UCUM: '*' is not a UCUM multiplication
    ("Gy", Quantity.DAP),         # a kerma unit is not a kerma-area product
    ("cGy", Quantity.DLP),
    ("", Quantity.AIR_KERMA),
])
def test_unknown_or_wrong_units_are_refused_not_guessed(unit, quantity):
    with pytest.raises(UnitError, match="not a known unit"):
        convert(1.0, unit, quantity)
