"""Platinum resistance thermometers: the IEC 60751 Callendar–Van Dusen equation, both ways (not a plugin).

R(t) = R0 [1 + A t + B t² + C (t − 100) t³], the C term only below 0 °C, with
IEC 60751's A = 3.9083e-3 /°C, B = −5.775e-7 /°C², C = −4.183e-12 /°C⁴, valid
from −200 °C to 850 °C. Written by hand because it is one line of algebra
that no general-purpose library carries; the tests check it against the
standard's table values and numpy's polynomial roots.

The inverse is closed-form at and above 0 °C, written in the rationalised form
t = 2(W − 1) / (A + √(A² + 4B(W − 1))), W = R/R0, which does not lose digits
to cancellation when B t is small; below 0 °C it starts from that quadratic
estimate and refines with Newton steps on the full quartic.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

A = 3.9083e-3
B = -5.775e-7
C = -4.183e-12
T_MIN = -200.0
T_MAX = 850.0
#: a resistance set to a table value rounded to 0.01 ohm may land just outside the range ends
RANGE_SLACK = 0.01

Array = npt.NDArray[np.float64]


def resistance(t: npt.ArrayLike, r0: npt.ArrayLike = 100.0) -> Array:
    """Resistance in ohms at ``t`` °C."""
    t = np.asarray(t, dtype=float)
    c = np.where(t < 0.0, C, 0.0)
    return np.asarray(r0, dtype=float) * (1.0 + A * t + B * t**2 + c * (t - 100.0) * t**3)


def slope(t: npt.ArrayLike, r0: npt.ArrayLike = 100.0) -> Array:
    """dR/dt in ohm/°C at ``t`` °C."""
    t = np.asarray(t, dtype=float)
    c = np.where(t < 0.0, C, 0.0)
    return np.asarray(r0, dtype=float) * (A + 2.0 * B * t + c * (4.0 * t**3 - 300.0 * t**2))


def temperature(r: npt.ArrayLike, r0: npt.ArrayLike = 100.0, iterations: int = 8) -> Array:
    """Temperature in °C for a resistance ``r`` ohms (NaN outside −200..850 °C, ± ``RANGE_SLACK``)."""
    r = np.asarray(r, dtype=float)
    r0 = np.asarray(r0, dtype=float)
    w1 = r / r0 - 1.0
    disc = A * A + 4.0 * B * w1
    with np.errstate(invalid="ignore"):
        t = 2.0 * w1 / (A + np.sqrt(np.where(disc >= 0.0, disc, np.nan)))
    below = w1 < 0.0
    if np.any(below):
        tb = np.where(below, t, -1.0)
        for _ in range(iterations):
            tb = tb - (resistance(tb, r0) - r) / slope(tb, r0)
        t = np.where(below, tb, t)
    in_range = (t >= T_MIN - RANGE_SLACK) & (t <= T_MAX + RANGE_SLACK)
    return np.where(in_range, t, np.nan)
