"""sheetfuncs.engine.frequency: grids, units, the contract JSON of the frequency command,
errors, and figures against closed forms (named beside each check)."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import signal

from sheetfuncs.engine import frequency
from sheetfuncs.errors import ParameterError, SamplingError, SheetfuncsError

def _cli(*args):
    """(exit status, stdout, stderr) of the sheetfuncs command, run in this process."""
    import contextlib
    import io

    from sheetfuncs import cli
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = cli.main(list(args))
    return rc, out.getvalue(), err.getvalue()


def test_contract_json_of_the_frequency_command():
    # contract of issue 8; values against scipy.signal.freqs and the second-order formulas (common practice)
    rc, out, err = _cli("frequency", "wn^2/(s^2+2 z wn s+wn^2)", "--param", "wn=2", "--param", "z=0.3",
                        "--from", "0.1", "--to", "10", "--n", "7", "--json")
    assert rc == 0, err
    d = json.loads(out)
    for key in ("omega", "magnitude_db", "phase_deg", "dc_gain_db", "bandwidth", "peak_db", "peak_frequency"):
        assert key in d
    w = np.array(d["omega"])
    assert np.allclose(w, np.geomspace(0.1, 10, 7))
    _, h = signal.freqs([4.0], [1.0, 1.2, 4.0], worN=w)
    assert np.allclose(d["magnitude_db"], 20 * np.log10(np.abs(h)), atol=1e-10)
    assert np.allclose(d["phase_deg"], np.degrees(np.unwrap(np.angle(h))), atol=1e-9)
    assert d["dc_gain_db"] == pytest.approx(0.0, abs=1e-12)
    assert d["peak_db"] == pytest.approx(20 * math.log10(1 / (2 * 0.3 * math.sqrt(1 - 0.09))), abs=1e-9)
    assert d["peak_frequency"] == pytest.approx(2 * math.sqrt(1 - 0.18), rel=1e-9)


def test_hz_changes_the_grid_and_text_but_not_the_json_units():
    rc, out, _ = _cli("frequency", "1/(s/6.283185307179586+1)", "--omega", "1,10", "--hz", "--json")
    d = json.loads(out)
    assert np.allclose(d["omega"], [2 * math.pi, 20 * math.pi])
    assert d["bandwidth"] == pytest.approx(2 * math.pi, rel=1e-12)      # corner at 1 Hz = 2 pi rad/s
    rc, text, _ = _cli("frequency", "1/(s/6.283185307179586+1)", "--omega", "1,10", "--hz")
    assert rc == 0 and "frequency (Hz)" in text and "-3 dB bandwidth      : 1 Hz" in text


def test_frequency_command_errors_are_one_line_and_exit_2():
    rc, out, err = _cli("frequency", "1/(s+1)", "--json")
    assert rc == 2 and "--omega" in json.loads(out)["error"]
    rc, out, err = _cli("frequency", "1/(s+a)", "--omega", "1")
    assert rc == 2 and "a" in err and err.count("\n") == 1
    rc, out, err = _cli("frequency", "1/(s+1)", "--from", "0", "--to", "1", "--n", "3")
    assert rc == 2 and "above zero" in err


def test_missing_parameter_and_bad_grids():
    with pytest.raises(ParameterError):
        frequency.frequency_response("1/(tau s + 1)", [1.0])
    with pytest.raises(SamplingError):
        frequency.grid([-1.0])
    with pytest.raises(SamplingError):
        frequency.grid(None, 10, 1, 5)
    with pytest.raises(SamplingError):
        frequency.grid(None, 1, 10, 0)
    with pytest.raises(SheetfuncsError):
        frequency.frequency_response("0*s", [1.0])


def test_integrator_has_no_dc_gain_and_a_zero_at_the_origin_has_zero():
    f = frequency.frequency_response("1/(s (s+1))", [1.0]).figures
    assert f.dc_gain is None and f.dc_gain_db is None and "pole" in f.notes[0]
    f = frequency.frequency_response("s/(s+1)", [1.0]).figures
    assert f.dc_gain == 0.0 and f.dc_gain_db is None
    # high-pass s/(s+1): -3 dB lower edge at the corner 1 rad/s (first-order formula, common practice)
    assert f.band_edges[0] == pytest.approx(1.0, rel=1e-12)


def test_phase_starts_on_the_low_frequency_asymptote():
    # common practice: phase at w -> 0+ is arg(c) + k 90 deg for F ~ c s^k
    for text, start in (("1/s^2", -180.0), ("-2/(s+1)", 180.0), ("s/(s+1)", 90.0), ("(1-s)/(1+s)", 0.0)):
        ph = frequency.frequency_response(text, [1e-6]).phase_deg[0]
        assert ph == pytest.approx(start, abs=1e-3), text


def test_all_pass_phase_and_flat_magnitude():
    # (1-s)/(1+s): |F| = 1, phase -2 atan(w) (elementary complex algebra)
    w = np.geomspace(1e-3, 1e3, 61)
    r = frequency.frequency_response("(1-s)/(1+s)", w)
    assert np.allclose(r.magnitude, 1.0, rtol=1e-14)
    assert np.allclose(np.radians(r.phase_deg), -2 * np.arctan(w), atol=1e-12)
    assert r.figures.peak is None


def test_high_degree_and_wide_grid_do_not_overflow():
    # 1/(s+1)^40 at w = 1e6: |F| = (1 + w^2)^-20 (elementary); plain polyval of the expanded denominator overflows there
    w = np.array([1e-3, 1.0, 1e3, 1e6])
    r = frequency.frequency_response("1/(s+1)^40", w)
    assert np.allclose(r.magnitude_db, -400 * np.log10(1 + w ** 2), rtol=1e-10, atol=1e-12)
    assert np.allclose(np.radians(r.phase_deg), -40 * np.arctan(w), atol=1e-9)


def test_several_delays_track_phase_and_match_direct_evaluation():
    # (1 - e^{-s})/s = e^{-s/2} 2 sinh(s/2)/s: |F(jw)| = |2 sin(w/2)/w| (elementary)
    w = np.geomspace(0.01, 30, 400)
    r = frequency.frequency_response("(1-exp(-s))/s", w)
    assert np.allclose(r.magnitude, np.abs(2 * np.sin(w / 2) / w), rtol=1e-10, atol=1e-14)
    assert np.allclose(np.exp(1j * np.radians(r.phase_deg)), r.value / np.abs(r.value), atol=1e-8)
    # the phase turns with -w/2 (plus jumps of 180 deg at the zeros w = 2 pi k)
    assert r.phase_deg[-1] < -math.degrees(15) + 1


def test_notch_bandwidth_on_the_falling_edge():
    # notch (s^2+1)/(s^2+0.5s+1): |F|^2 = (1-w^2)^2/((1-w^2)^2+0.25 w^2) = 1/2 at 1 - w^2 = 0.5 w  (elementary)
    f = frequency.frequency_response("(s^2+1)/(s^2+0.5s+1)", [1.0]).figures
    assert f.bandwidth == pytest.approx((-0.5 + math.sqrt(0.25 + 4)) / 2, rel=1e-12)


def test_non_rational_peak_against_a_dense_grid():
    # reference: numpy on 2e6 points of exp(-sqrt(jw))/(1 - w^2 + 0.2 jw) (direct evaluation of the formula)
    f = frequency.frequency_response("exp(-sqrt(s))/(s^2+0.2s+1)", [1.0]).figures
    w = np.linspace(0.5, 1.5, 2_000_001)
    mag = np.abs(np.exp(-np.sqrt(1j * w)) / (1 - w ** 2 + 0.2j * w))
    i = int(np.argmax(mag))
    assert f.peak == pytest.approx(mag[i], rel=1e-10)
    assert f.peak_frequency == pytest.approx(w[i], abs=2e-6)
    assert frequency.frequency_response("sin(s)", [1.0]).figures.peak is None     # grows without bound
