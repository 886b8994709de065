"""IEC 60751 Callendar–Van Dusen equation (plugins/rtd.py), both directions."""

from __future__ import annotations

import numpy as np
import pytest
from loopledger.plugins.signals import rtd

#: IEC 60751 Pt100 values; /work/shared/domain.md lists them as computed from the standard's equation
#: and matching the published tables to 2 decimals (source: IEC 60751, R0 = 100 ohm).
IEC_60751_PT100 = [(-200.0, 18.5201), (-100.0, 60.2558), (0.0, 100.0000), (50.0, 119.3971),
                   (100.0, 138.5055), (200.0, 175.8560), (400.0, 247.0920), (850.0, 390.4811)]


@pytest.mark.parametrize(("t", "ohms"), IEC_60751_PT100)
def test_resistance_matches_iec_60751(t, ohms):
    # source: IEC 60751 (values in /work/shared/domain.md)
    assert rtd.resistance(t) == pytest.approx(ohms, abs=5e-5)


@pytest.mark.parametrize(("t", "ohms"), IEC_60751_PT100)
def test_temperature_from_resistance_matches_iec_60751(t, ohms):
    # source: IEC 60751; the table's 4-decimal rounding of R is worth < 0.0002 °C
    assert rtd.temperature(ohms) == pytest.approx(t, abs=2e-4)


def test_pt1000_scales_with_r0():
    # source: IEC 60751 (the equation is R0 × the same polynomial): Pt1000 at 100 °C = 1385.055 ohm
    assert rtd.resistance(100.0, 1000.0) == pytest.approx(1385.055, abs=5e-4)
    assert rtd.temperature(1385.055, 1000.0) == pytest.approx(100.0, abs=1e-4)


def test_inverse_agrees_with_numpy_polynomial_roots():
    # reference: numpy.roots of the IEC 60751 quartic (below 0 °C) and quadratic (above), a
    # general-purpose solver independent of the plugin's Newton / rationalised closed form
    for ohms in (20.0, 43.2, 71.9, 99.99, 100.01, 150.0, 300.0, 390.0):
        w = ohms / 100.0
        if w < 1.0:
            coeffs = [rtd.C, -100.0 * rtd.C, rtd.B, rtd.A, 1.0 - w]
        else:
            coeffs = [rtd.B, rtd.A, 1.0 - w]
        roots = np.roots(coeffs)
        real = roots[np.isclose(roots.imag, 0.0)].real
        t_ref = real[(real >= -200.0) & (real <= 850.0)]
        assert len(t_ref) == 1
        assert rtd.temperature(ohms) == pytest.approx(t_ref[0], abs=1e-9)


def test_round_trip_is_exact_across_the_range():
    # property: temperature(resistance(t)) = t over the whole IEC 60751 range
    t = np.linspace(-200.0, 850.0, 2101)
    assert np.max(np.abs(rtd.temperature(rtd.resistance(t)) - t)) < 1e-9


def test_slope_matches_finite_difference():
    # numerical derivative (central difference) of the IEC 60751 equation
    t = np.array([-150.0, -20.0, -0.5, 0.5, 120.0, 600.0])
    h = 1e-4
    numeric = (rtd.resistance(t + h) - rtd.resistance(t - h)) / (2 * h)
    assert np.allclose(rtd.slope(t), numeric, rtol=1e-7)
    # IEC 60751: the mean slope 0..100 °C is alpha = 0.00385 /°C × R0 = 0.385 ohm/°C
    assert (rtd.resistance(100.0) - rtd.resistance(0.0)) / 100.0 == pytest.approx(0.385055, abs=1e-6)


def test_out_of_range_resistance_is_nan():
    # IEC 60751 defines the equation from −200 °C to 850 °C only
    assert np.isnan(rtd.temperature(10.0))
    assert np.isnan(rtd.temperature(400.0))
    # ... but the −200 °C table value rounded to 2 decimals (18.52 ohm) is still accepted
    assert rtd.temperature(18.52) == pytest.approx(-200.0, abs=0.001)
