"""Units in parameter labels, SI-prefixed values and output units of figures.

Three things, all outside expressions (in an expression ``2k`` stays 2*k):

``label_of("R [kohm]")``  -> ``("R", "kohm")``: a parameter label is a name, optionally
    followed by its unit in square brackets.
``si_factor("kohm")``     -> ``Fraction(1000)``: the factor that turns a value in that unit into
    coherent SI (base) units, from pint.  A unit pint cannot read is a ``ParameterError``, never
    ignored.  Offset temperatures (degC, degF) are read as temperature *differences* (a value in
    ``[degC]`` is that many kelvin): Laplace-domain models work with changes.
``prefixed_number("4.7u")`` -> ``Fraction(47, 10_000_000)``, or None when the text is not a number
    with an SI prefix.  Prefixes (SI brochure, BIPM, table of SI prefixes, engineering subset):
    f p n u/µ m k M G T, and ``meg`` (any case) for mega.  Case matters as in the SI: ``m`` is milli
    (10^-3) and ``M`` is mega (10^6) -- never milli as in SPICE.  ``K`` is refused with a hint
    (kilo is a lowercase ``k``).

Output units of figures: ``convert_out(value, kind, unit)`` shows a figure found in SI (times in s,
angular frequencies in rad/s, values in the SI unit of the output) in the unit asked for.  Hertz
units (``Hz``, ``kHz``) are cycles per second, so ``rad/s -> Hz`` divides by 2 pi (pint alone
would not, as it takes the radian as 1); ``rpm``, ``deg/s``, ``cycle/s`` go through pint, and a
plain ``1/s`` is taken as rad/s.

pint is imported on first use and its registry built once (it takes about half a second); factors
are cached by unit text.
"""
from __future__ import annotations

import functools
import math
import re
from fractions import Fraction

from .errors import ParameterError

#: SI prefixes accepted on values (SI brochure, 9th edition, table 7: engineering subset)
PREFIXES = {
    "f": Fraction(1, 10**15), "p": Fraction(1, 10**12), "n": Fraction(1, 10**9),
    "u": Fraction(1, 10**6), "\u00b5": Fraction(1, 10**6), "\u03bc": Fraction(1, 10**6),
    "m": Fraction(1, 10**3), "k": Fraction(10**3), "M": Fraction(10**6), "meg": Fraction(10**6),
    "G": Fraction(10**9), "T": Fraction(10**12),
}
MAX_UNIT_LENGTH = 60
_PREFIX_LIST = " ".join(k for k in PREFIXES if k != "\u03bc")

_NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_PREFIXED = re.compile(rf"\s*({_NUMBER})\s*(meg|[fpnu\u00b5\u03bcmkMGT])\s*", re.IGNORECASE)
_ONE_LETTER = re.compile(rf"\s*{_NUMBER}\s*([A-Za-z])\s*")
_LABEL = re.compile(r"\s*([A-Za-z][A-Za-z0-9]*)\s*(?:\[([^\[\]]*)\])?\s*")
#: characters a unit text may hold: letters (with µ μ Ω °), digits, spaces, * / ^ ( ) . % and -
_UNIT_CHARS = re.compile(r"[A-Za-z0-9\u00b5\u03bc\u03a9\u2126\u00b0 */^().%-]*")
_NO_UNIT = {"", "-", "1", "none", "dimensionless"}
_ANGLE_WORDS = ("radian", "degree", "revolution", "turn", "cycle", "grade", "gradian", "arcminute",
                "arcsecond")


# ------------------------------------------------------------------ values with SI prefixes
def prefixed_number(text: str) -> Fraction | None:
    """``'10k'`` -> 10000, ``'22n'`` -> 22e-9 (exact); None if ``text`` has no SI prefix."""
    if not isinstance(text, str):
        return None
    m = _PREFIXED.fullmatch(text)
    if not m:
        m1 = _ONE_LETTER.fullmatch(text)
        if m1 and m1.group(1) == "K":
            raise ParameterError(f"'{text.strip()}': the SI prefix kilo is a lowercase k (write "
                                 f"'{text.strip()[:-1].strip()}k')")
        return None
    number, prefix = m.group(1), m.group(2)
    if prefix.lower() == "meg":
        prefix = "meg"
    elif prefix not in PREFIXES:          # the case-insensitive match let 'N', 'F', 'U' ... through
        hint = "kilo is a lowercase k" if prefix == "K" else "prefixes are case-sensitive"
        raise ParameterError(f"'{text.strip()}': '{prefix}' is not an SI prefix ({hint}; use one of "
                             f"{_PREFIX_LIST})")
    return Fraction(number) * PREFIXES[prefix]


# ------------------------------------------------------------------ labels
def label_of(text: str) -> tuple[str, str | None]:
    """``'R [kohm]'`` -> ``('R', 'kohm')``; ``'tau'`` -> ``('tau', None)``.

    Anything else (``'R (kohm)'``, ``'R series'``) is refused: a unit that would be dropped is an
    error, not a guess."""
    m = _LABEL.fullmatch(text)
    if not m:
        raise ParameterError(f"parameter label '{text.strip()}' is not NAME or NAME [unit] "
                             f"(for example 'R [kohm]')")
    name, unit = m.group(1), m.group(2)
    if unit is not None and unit.strip() in _NO_UNIT:
        unit = None
    return name, None if unit is None else unit.strip()


@functools.lru_cache(maxsize=1)
def registry():
    """The pint unit registry, built once on first use."""
    import pint
    return pint.UnitRegistry(autoconvert_offset_to_baseunit=False)


def _check_unit_text(unit: str) -> None:
    if len(unit) > MAX_UNIT_LENGTH:
        raise ParameterError(f"unit '{unit[:20]}...' is longer than {MAX_UNIT_LENGTH} characters")
    if not _UNIT_CHARS.fullmatch(unit):
        bad = next(ch for ch in unit if not _UNIT_CHARS.fullmatch(ch))
        raise ParameterError(f"unit '{unit}': character '{bad}' is not allowed in a unit")
    rest = re.sub(r"(\^|\*\*)\s*\(?\s*[+-]?\d+(\.\d+)?\s*\)?", "", unit)     # exponents: m^2, s**-1
    rest = re.sub(r"^\s*1\s*/", "", rest)                                 # the 1 of 1/s
    if re.search(r"\d", rest):
        raise ParameterError(f"unit '{unit}': a number is not a unit (write a prefix: 'ms', 'kohm')")


@functools.lru_cache(maxsize=512)
def _root(unit: str):
    """(factor to SI base units as float, SI base units, dimensionality) of a unit text."""
    _check_unit_text(unit)
    ureg = registry()
    import pint
    try:
        factor, root = ureg.get_root_units(unit.replace("\u00b0C", "degC").replace("\u00b0F", "degF"))
        q = ureg.Quantity(factor, root).to_base_units()
    except (pint.errors.PintError, AttributeError, TypeError, ValueError, SyntaxError,
            AssertionError, KeyError, IndexError, ZeroDivisionError) as exc:
        why = f" ({exc})" if str(exc) and isinstance(exc, pint.errors.UndefinedUnitError) else ""
        raise ParameterError(f"unit '{unit}' is not a unit pint can read{why}") from None
    mag = float(q.magnitude)
    if not math.isfinite(mag) or mag == 0:
        raise ParameterError(f"unit '{unit}' has no finite conversion to SI")
    return mag, q.units, q.dimensionality


def si_factor(unit: str) -> Fraction:
    """Exact factor from ``unit`` to coherent SI: 'kohm' -> 1000, 'uF' -> 1/10^6, 'degF' -> 5/9.

    pint gives the factor as a float; it is read back at 15 significant digits, which is exact for
    every decimal-prefixed unit and within 1e-15 of the rest (degF, inch, rpm ...)."""
    mag = _root(unit)[0]
    simple = Fraction(mag).limit_denominator(1000)          # 5/9 of degF, 1/60 of a minute
    if simple and abs(float(simple) - mag) <= 1e-15 * abs(mag):
        return simple
    return Fraction(f"{mag:.15g}")


def si_units(unit: str) -> str:
    """The SI base units of ``unit`` as text ('kohm' -> 'kilogram * meter ** 2 / ...')."""
    return str(_root(unit)[1])


def to_si(value, unit: str | None):
    """``value`` (a number or SI-prefixed text) in ``unit`` as an exact SI Fraction.
    Values of other kinds (None, TRUE/FALSE, non-finite) are returned unchanged for the parameter
    reader to refuse with its own message."""
    if unit is None:
        return value
    factor = si_factor(unit)
    if isinstance(value, bool) or value is None:
        return value
    if isinstance(value, (int, Fraction)):
        return Fraction(value) * factor
    if isinstance(value, float):
        if not math.isfinite(value):
            return value
        return Fraction(repr(value)) * factor
    if isinstance(value, str):
        p = prefixed_number(value)
        if p is not None:
            return p * factor
        try:
            return Fraction(value.strip()) * factor
        except (ValueError, ZeroDivisionError):
            raise ParameterError(f"value '{value}' with unit [{unit}] must be a plain number "
                                 f"(SI prefixes allowed: 22n, 4.7u)") from None
    return value


# ------------------------------------------------------------------ output units
#: what each figure is measured in, in SI
TIME, FREQUENCY, PERCENT, VALUE, RATE = "time", "frequency", "percent", "value", "rate"


def _dim(unit: str) -> dict:
    return dict(_root(unit)[2])


def _is_cyclic(unit: str) -> bool:
    """True for hertz-based units (Hz, kHz): cycles per second, per the SI brochure's use of the
    hertz for periodic phenomena.  Units with an angle (rad/s, deg/s, rpm, cycle/s) are converted
    by pint; plain 1/s is taken as rad/s."""
    names = registry().parse_units(unit)._units
    if any(any(w in n for w in _ANGLE_WORDS) or n == "revolutions_per_minute" for n in names):
        return False
    return any("hertz" in n for n in names)


def convert_out(value: float, kind: str, unit: str) -> float:
    """A figure in SI (``kind``: time in s, frequency in rad/s, rate in 1/s, percent, or a value
    in the output's SI unit) shown in ``unit``; a unit of the wrong kind is an error."""
    unit = unit.strip()
    if value is None:
        return None
    if kind == TIME:
        if _dim(unit) != {"[time]": 1}:
            raise ParameterError(f"unit [{unit}] is not a unit of time")
        return float(value / _root(unit)[0])
    if kind in (FREQUENCY, RATE):
        if _dim(unit) != {"[time]": -1}:
            raise ParameterError(f"unit [{unit}] is not a unit of frequency (Hz, rad/s, 1/s, rpm ...)")
        v = float(value)
        if kind == FREQUENCY and _is_cyclic(unit):
            v = v / (2 * math.pi)                  # rad/s -> cycles per second
        return v / _root(unit)[0]
    if kind == PERCENT:
        if _dim(unit) != {}:
            raise ParameterError(f"unit [{unit}] is not a ratio (use % or 1)")
        return float(value) / 100 / _root(unit)[0]
    if kind == VALUE:
        return float(value) / _root(unit)[0]
    raise ParameterError(f"this figure has no unit to convert to [{unit}]")
