"""IEC 60584-1 thermocouple reference functions as loopledger uses them (plugins/thermocouple.py)."""

from __future__ import annotations

import pandas as pd
import pytest
import thermocouple_its90 as its90
from loopledger.plugins.signals import thermocouple as tc

#: IEC 60584-1 / NIST Monograph 175 table values, emf in mV with the reference junction at 0 °C
#: (source: the tables as listed in /work/shared/domain.md, 3 decimals)
TYPE_K = [(-200.0, -5.891), (-100.0, -3.554), (25.0, 1.000), (100.0, 4.096), (200.0, 8.138),
          (500.0, 20.644), (1000.0, 41.276), (1200.0, 48.838)]
TYPE_J = [(-200.0, -7.890), (-100.0, -4.633), (25.0, 1.277), (100.0, 5.269), (200.0, 10.779),
          (500.0, 27.393), (1000.0, 57.953), (1200.0, 69.553)]
TABLES = [("K", t, e) for t, e in TYPE_K] + [("J", t, e) for t, e in TYPE_J]


def _col(*values):
    return pd.Series(list(values))


@pytest.mark.parametrize(("kind", "t", "mv"), TABLES)
def test_emf_matches_iec_60584_table(kind, t, mv):
    # source: IEC 60584-1 / NIST Monograph 175 tables (domain.md); tables round to 0.001 mV
    assert tc.emf(_col(t), _col(kind))[0] == pytest.approx(mv, abs=5.1e-4)


@pytest.mark.parametrize(("kind", "t", "mv"), TABLES)
def test_temperature_from_table_emf(kind, t, mv):
    # source: same tables, read backwards; 0.0005 mV of rounding is at most ~0.03 °C at these slopes
    assert tc.temperature(_col(mv), _col(kind), _col(0.0))[0] == pytest.approx(t, abs=0.03)


@pytest.mark.parametrize("kind", ["K", "J"])
def test_vectorised_wrapper_agrees_with_the_reference_package(kind):
    # reference: thermocouple-its90 (NIST ITS-90 database), called one value at a time
    t = pd.Series([-150.0, -3.0, 0.0, 37.5, 260.0, 700.0, 1100.0, 260.0])
    kinds = pd.Series([kind] * len(t))
    expected = [its90.get(kind).emf(v) for v in t]
    assert tc.emf(t, kinds).tolist() == pytest.approx(expected, abs=1e-12)


def test_cold_junction_compensation_uses_the_reference_emf():
    # IEC 60584-1 table values (domain.md): E_K(100 °C) = 4.096 mV, E_K(25 °C) = 1.000 mV. A transmitter
    # whose terminals sit at 25 °C sees 4.096 − 1.000 = 3.096 mV from a 100 °C junction and adds E(25 °C)
    # back (cold-junction compensation, the law of intermediate temperatures).
    t = tc.temperature(_col(3.096), _col("K"), _col(25.0))[0]
    assert t == pytest.approx(100.0, abs=0.03)
    # and the same emf read with the reference junction at 0 °C is a much lower temperature
    assert tc.temperature(_col(3.096), _col("K"), _col(0.0))[0] < 80.0


def test_seebeck_is_the_derivative_of_emf():
    # numerical derivative (central difference) of the reference function
    t, h = pd.Series([-120.0, 50.0, 400.0, 1000.0]), 1e-3
    k = pd.Series(["K"] * 4)
    numeric = (tc.emf(t + h, k) - tc.emf(t - h, k)) / (2 * h)
    assert tc.seebeck(t, k).tolist() == pytest.approx(numeric.tolist(), rel=1e-6)
    # type K's Seebeck coefficient near 500 °C is about 42-43 µV/°C (from memory)
    assert tc.seebeck(pd.Series([500.0]), pd.Series(["K"]))[0] == pytest.approx(0.0426, abs=0.001)


def test_out_of_range_and_unknown_types_are_nan():
    # type K is defined from −270 °C to 1372 °C (IEC 60584-1)
    out = tc.temperature(_col(80.0, 1.0), _col("K", "Q"), _col(0.0, 0.0))
    assert out.isna().all()
