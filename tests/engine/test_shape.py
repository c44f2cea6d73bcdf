"""sheetfuncs.engine.shape against textbook second-order results (common practice) and
scipy.signal responses scanned on dense grids (reference library)."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from sheetfuncs.engine import shape
from sheetfuncs.errors import SheetfuncsError

MASS, DAMP, STIFF, X0 = 45.0, 600.0, 180000.0, 0.005
RELEASE = f"({MASS} {X0} s + {DAMP} {X0})/({MASS} s^2 + {DAMP} s + {STIFF})"


def _zeta_wn():
    wn = math.sqrt(STIFF / MASS)
    return DAMP / (2 * math.sqrt(STIFF * MASS)), wn


def test_released_mass_textbook_figures():
    # free vibration from x0 with v0 = 0 (textbook): first swing back -x0 exp(-zeta pi/sqrt(1-zeta^2)),
    # logarithmic decrement 2 pi zeta/sqrt(1-zeta^2), damped period 2 pi/(wn sqrt(1-zeta^2))
    z, wn = _zeta_wn()
    f = shape.response_shape(RELEASE)
    assert f.final_value == 0.0
    assert f.extremum_value == pytest.approx(X0, rel=1e-12) and f.extremum_time == 0.0
    assert f.undershoot == pytest.approx(X0 * math.exp(-z * math.pi / math.sqrt(1 - z * z)), rel=1e-9)
    assert f.decrement == pytest.approx(2 * math.pi * z / math.sqrt(1 - z * z), rel=1e-12)
    assert f.period == pytest.approx(2 * math.pi / (wn * math.sqrt(1 - z * z)), rel=1e-12)
    assert f.measured_decrement == pytest.approx(f.decrement, rel=1e-8)
    assert f.measured_period == pytest.approx(f.period, rel=1e-7)


def test_released_mass_decay_time_against_scipy():
    # reference: scipy.signal.impulse of the same X(s) on a dense grid; last time |x| >= 5 % of x0
    f = shape.response_shape(RELEASE, decay=5.0)
    t = np.linspace(0, 1.0, 200_001)
    _, x = signal.impulse(([MASS * X0, DAMP * X0], [MASS, DAMP, STIFF]), T=t)
    last = t[np.nonzero(np.abs(x) >= 0.05 * X0)[0][-1]]
    assert f.decay_time == pytest.approx(last, abs=1e-5)      # grid step 5e-6


def test_step_peak_textbook():
    # second-order step: peak 1 + exp(-zeta pi/sqrt(1-zeta^2)) at pi/wd (textbook)
    z, wn = 0.3, 2.0
    f = shape.response_shape(f"{wn * wn}/(s^2 + {2 * z * wn} s + {wn * wn})", input="step")
    assert f.final_value == pytest.approx(1.0, rel=1e-14)
    assert f.extremum_value == pytest.approx(1 + math.exp(-z * math.pi / math.sqrt(1 - z * z)), rel=1e-10)
    assert f.extremum_time == pytest.approx(math.pi / (wn * math.sqrt(1 - z * z)), rel=1e-7)
    assert f.undershoot == 0.0


def test_non_minimum_phase_undershoot_against_scipy():
    # reference: scipy.signal.step of (1-s)/(s+1)^2 on a dense grid: the initial dip below zero
    f = shape.response_shape("(1-s)/(s+1)^2", input="step")
    t = np.linspace(0, 10, 100_001)
    _, y = signal.step(([-1.0, 1.0], [1.0, 2.0, 1.0]), T=t)
    assert f.undershoot == pytest.approx(-float(np.min(y)), rel=1e-7)
    assert f.undershoot_percent == pytest.approx(100 * f.undershoot, rel=1e-12)
    assert f.extremum_time is None and f.extremum_value == pytest.approx(1.0)
    assert f.decrement is None                       # dominant mode real (double pole at -1)


def test_delayed_response_and_not_settling():
    # e^{-2s}/(s^2+0.4s+4): the same decrement as without delay (poles unchanged), extremum after the delay
    f = shape.response_shape("exp(-2s)/(s^2+0.4s+4)")
    z, wn = 0.1, 2.0
    assert f.decrement == pytest.approx(2 * math.pi * z / math.sqrt(1 - z * z), rel=1e-12)
    assert f.extremum_time > 2.0
    g = shape.response_shape("1/(s^2+1)")
    assert g.final_value is None and g.extremum_value is None and "does not settle" in g.notes[-1]
    assert g.decrement == 0.0 and g.period == pytest.approx(2 * math.pi)


def test_bad_decay_level():
    with pytest.raises(SheetfuncsError):
        shape.response_shape("1/(s+1)", decay=150)
