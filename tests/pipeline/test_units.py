"""The small unit registry (pipeline/units.txt) against pint's full default registry, the reference.

Every everyday name must mean exactly what pint's own default definitions make it mean (same dimension,
same factor to the root units to the last bit, same offset), so a conversion gives the same float
whichever registry made it; any other name goes to pint's full registry.
"""

from __future__ import annotations

import itertools

import pint
import pytest
from loopledger import quantities as q


@pytest.fixture(scope="module")
def full() -> pint.UnitRegistry:
    """pint's own default definitions, plus the one loopledger adds to both registries (the var)."""
    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define(q.REACTIVE)
    return ureg


def test_the_var_is_a_volt_ampere_of_reactive_power():
    """IEC 60050-131 names the unit of reactive power the var, 1 var = 1 V·A (from memory); pint's default
    definitions lack it, so a kvar range is read by both registries only thanks to loopledger's own line."""
    plain = pint.UnitRegistry()
    with pytest.raises(pint.errors.UndefinedUnitError):
        plain.Unit("kvar")
    for ureg in (q.everyday_registry(), q.registry()):
        assert ureg.Quantity(-250.0, "kvar").to("VA").magnitude == -250_000.0
        assert ureg.Quantity(1.5, "Mvar").to("kVAr").magnitude == 1500.0
        assert str(ureg.Unit("var").dimensionality) == str(plain.Unit("W").dimensionality)
    assert q.registry_for("kvar", "MVAr") is q.everyday_registry()


@pytest.mark.parametrize("name", sorted(q.EVERYDAY))
def test_every_everyday_name_means_what_pint_makes_it_mean(name, full):
    small = q.everyday_registry()
    mine, theirs = small.Quantity(1.0, name), full.Quantity(1.0, name)
    assert str(mine.dimensionality) == str(theirs.dimensionality)
    assert str(mine.to_root_units().units) == str(theirs.to_root_units().units)
    assert mine.to_root_units().magnitude == theirs.to_root_units().magnitude  # exact, not approximately
    if str(mine.dimensionality) == "[temperature]":  # offset units: 0 of each in kelvin
        assert small.Quantity(0.0, name).to("kelvin").magnitude == full.Quantity(0.0, name).to("kelvin").magnitude


def test_conversions_equal_pints_to_the_last_bit(full):
    """affine() between every two everyday names of one dimension, against pint's full registry."""
    small = q.everyday_registry()
    by_dimension: dict[str, list[str]] = {}
    for name in sorted(q.EVERYDAY):
        by_dimension.setdefault(str(small.Unit(name).dimensionality), []).append(name)
    pairs = [p for names in by_dimension.values() for p in itertools.permutations(names, 2)]
    pairs += [("ppm/K", "1/K"), ("percent/K", "1/K"), ("ppm", "dimensionless"), ("m^3/h", "l/min")]
    assert len(pairs) > 500
    for unit, target in pairs:
        assert q.registry_for(unit, target) is small
        expected_zero = full.Quantity(0.0, unit).to(target).magnitude
        expected_one = full.Quantity(1.0, unit).to(target).magnitude
        assert q.affine(unit, target) == (expected_one - expected_zero, expected_zero), (unit, target)


def test_names_pint_reads_otherwise_are_left_to_pint(full):
    """Why the list is explicit: read as a prefix and a unit, some of pint's own names would change
    meaning (``Eh`` the hartree as exa-hours, ``hbar`` as hecto-bar); they, and names the small file
    lacks, are read by pint's full registry."""
    small = q.everyday_registry()
    misread = []
    for name in full:
        try:
            mine = small.Quantity(1.0, name).to_root_units()
        except Exception:  # noqa: BLE001 - pint raises several kinds for an unknown name
            continue
        theirs = full.Quantity(1.0, name).to_root_units()
        if (mine.magnitude, str(mine.units)) != (theirs.magnitude, str(theirs.units)):
            misread.append(name)
    assert "Eh" in misread and "hbar" in misread
    assert not set(misread) & q.EVERYDAY
    for unit in ("Eh", "hbar", "psi", "inH2O", "degR"):
        assert q.registry_for(unit) is q.registry()
    assert q.affine("psi", "bar") == (full.Quantity(1.0, "psi").to("bar").magnitude
                                      - full.Quantity(0.0, "psi").to("bar").magnitude,
                                      full.Quantity(0.0, "psi").to("bar").magnitude)


def test_everyday_units_do_not_build_the_full_registry():
    q.registry.cache_clear()
    q.unit_check.cache_clear()
    q.affine.cache_clear()
    try:
        assert q.unit_check("mA") == "[current]"
        assert q.affine("degC", "K") == (1.0, 273.15)
        assert q.to_float("0.4011 V", "mV") == pytest.approx(401.1)
        assert q.parse_spec("0.05 %rdg + 2 digits").pct_rdg == 0.05
        assert q.registry.cache_info().currsize == 0, "pint's full registry was built for everyday units"
        assert q.unit_check("psi") == "[mass] / [length] / [time] ** 2"  # a name outside the list
        assert q.registry.cache_info().currsize == 1
    finally:
        q.unit_check.cache_clear()
        q.affine.cache_clear()
