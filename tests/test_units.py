"""sheetfuncs.units: labels, SI-prefixed values, conversions to SI and output units.

Outside references: pint's own conversions (a second, independent registry built here), the SI
prefixes of the SI brochure (BIPM, 9th edition, table of SI prefixes), f = omega/(2 pi)."""
import json
import math
import subprocess
import sys
from fractions import Fraction

import pint
import pytest

from sheetfuncs import units
from sheetfuncs.cli import main
from sheetfuncs.engine.parse import param_value
from sheetfuncs.errors import ParameterError

UREG = pint.UnitRegistry()

# SI brochure (BIPM), table of SI prefixes: symbol -> power of ten
SI_BROCHURE = {"f": -15, "p": -12, "n": -9, "u": -6, "\u00b5": -6, "m": -3, "k": 3, "M": 6, "G": 9, "T": 12}


@pytest.mark.parametrize("prefix,power", sorted(SI_BROCHURE.items()))
def test_prefixes_follow_the_si_brochure(prefix, power):
    assert units.prefixed_number(f"4.7{prefix}") == Fraction(47, 10) * Fraction(10) ** power


def test_m_is_milli_and_M_is_mega_meg_is_mega():
    assert units.prefixed_number("1m") == Fraction(1, 1000)         # SI: milli
    assert units.prefixed_number("1M") == 10**6                    # SI: mega (not SPICE's milli)
    assert units.prefixed_number("1meg") == units.prefixed_number("1MEG") == 10**6
    assert units.prefixed_number("2.2e3k") == 2_200_000
    assert units.prefixed_number("10") is None and units.prefixed_number("abc") is None
    for bad in ("10K", "3N", "1U"):
        with pytest.raises(ParameterError):
            units.prefixed_number(bad)


def test_param_value_reads_prefixes_exactly():
    assert param_value("R", "10k") == 10000
    assert param_value("C", "22n") == Fraction(22, 10**9)
    assert param_value("L", "4.7u") == Fraction(47, 10**7)
    assert param_value("G", "1.5M") == 1_500_000
    assert param_value("x", "2*pi") > 6                              # constant expressions still read
    with pytest.raises(ParameterError):
        param_value("R", "10K")
    with pytest.raises(ParameterError, match="label"):
        param_value("C", "22 nF")                                    # units go in the label


@pytest.mark.parametrize("unit", ["kohm", "uF", "nF", "g", "ms", "mH", "kN/m", "N s/m", "m^2/s", "inch",
                                  "psi", "bar", "min", "h", "mm", "L/min", "kW", "MPa", "rpm", "degree"])
def test_si_factor_agrees_with_pint(unit):
    ref = UREG.Quantity(1.0, unit).to_base_units().magnitude
    assert float(units.si_factor(unit)) == pytest.approx(ref, rel=1e-14)


def test_exact_factors_and_temperature_differences():
    assert units.si_factor("kohm") == 1000 and units.si_factor("uF") == Fraction(1, 10**6)
    assert units.si_factor("degF") == Fraction(5, 9)                # a Fahrenheit degree is 5/9 K
    assert units.si_factor("degC") == 1                              # read as a difference: 1 K
    assert units.si_factor("degC/%") == 100
    assert units.to_si(10.0, "kohm") == 10000 and units.to_si("22", "nF") == Fraction(22, 10**9)
    assert units.to_si("4.7", "kohm") == 4700 and units.to_si("2k", "ohm") == 2000


def test_labels():
    assert units.label_of("R [kohm]") == ("R", "kohm")
    assert units.label_of(" C[uF] ") == ("C", "uF")
    assert units.label_of("tau") == ("tau", None)
    assert units.label_of("zeta [-]") == ("zeta", None) == units.label_of("zeta [1]")
    for bad in ("R (kohm)", "R series", "2R", "R [k]ohm"):
        with pytest.raises(ParameterError):
            units.label_of(bad)


@pytest.mark.parametrize("bad", ["blorb", "1000 ms", "__import__", "m;s", "a" * 80, "os.system"])
def test_units_pint_cannot_read_are_errors(bad):
    with pytest.raises(ParameterError):
        units.si_factor(bad)


def test_output_units():
    w = 2 * math.pi * 50.0
    assert units.convert_out(w, units.FREQUENCY, "Hz") == pytest.approx(50.0)       # f = omega/(2 pi)
    assert units.convert_out(w, units.FREQUENCY, "kHz") == pytest.approx(0.05)
    assert units.convert_out(w, units.FREQUENCY, "rad/s") == pytest.approx(w)
    assert units.convert_out(w, units.FREQUENCY, "1/s") == pytest.approx(w)                # rad/s
    assert units.convert_out(w, units.FREQUENCY, "cycle/s") == pytest.approx(50.0)         # pint
    assert units.convert_out(w, units.FREQUENCY, "rpm") == pytest.approx(
        UREG.Quantity(w, "rad/s").to("rpm").magnitude)                              # pint: 3000 rpm
    assert units.convert_out(8.6e-4, units.TIME, "ms") == pytest.approx(0.86)
    assert units.convert_out(37.2, units.PERCENT, "%") == pytest.approx(37.2)
    assert units.convert_out(0.05, units.VALUE, "mm") == pytest.approx(50.0)
    for kind, unit in ((units.TIME, "Hz"), (units.FREQUENCY, "s"), (units.PERCENT, "s")):
        with pytest.raises(ParameterError):
            units.convert_out(1.0, kind, unit)


def test_pint_is_loaded_only_when_a_unit_is_used():
    code = ("import sys, sheetfuncs, sheetfuncs.cellfuncs, sheetfuncs.cli;"
            "from sheetfuncs.engine.parse import param_value; param_value('R', '10k');"
            "print('pint' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_cli_param_with_prefix(capsys):
    # RC low pass, impulse response at t = 0 is 1/(RC) (textbook first-order pair)
    assert main(["sample", "1/(R C s + 1)", "--param", "R=10k", "--param", "C=22n", "--times", "0",
                 "--json"]) == 0
    y = json.loads(capsys.readouterr().out)["y"][0]
    assert y == pytest.approx(1 / (10e3 * 22e-9), rel=1e-12)
    assert main(["sample", "1/(R s + 1)", "--param", "R=10K", "--times", "0"]) == 2
    assert "lowercase k" in capsys.readouterr().err


def test_prefixes_never_inside_expressions():
    from sheetfuncs import api
    res = api.invert("1/(2k s + 1)", {"k": 3})                      # 2k is 2*k: tau = 6
    t = next(iter(res.f_t.free_symbols))
    assert float(res.f_t.subs(t, 0)) == pytest.approx(1 / 6)


def test_cli_param_units_give_the_rc_settling_time(capsys):
    # first-order settling to 2 %: tau ln 50 (common practice), tau = RC = 10 kohm * 22 nF
    assert main(["figures", "1/(R C s + 1)", "--param", "R [kohm]=10", "--param", "C [nF]=22", "--json"]) == 0
    got = json.loads(capsys.readouterr().out)["settling_time"]
    assert got == pytest.approx(10e3 * 22e-9 * math.log(50), rel=1e-9) and got == pytest.approx(0.86e-3, rel=1e-3)
    assert main(["figures", "1/(R s + 1)", "--param", "R [blorb]=1"]) == 2
    assert "blorb" in capsys.readouterr().err
