"""Human-readable text of results for the command line: aligned tables."""
from __future__ import annotations

import math
from dataclasses import dataclass

from ._lazy import sympy as sp


def pair(x):
    """A number as [re, im] (the general route's converter, imported on first use)."""
    from .engine.results import pair as convert
    return convert(x)


LN50 = math.log(50.0)          # a simple mode's envelope e^(sigma t) falls to 2 % after tau ln 50


def _g(x, digits=6):
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, str):
        return x
    return f"{x:.{digits}g}"


def complex_text(z, digits=6) -> str:
    """``[re, im]`` as text: '-1 + 2j', '0.5', or symbolic parts as they are."""
    re, im = z
    if isinstance(re, str) or isinstance(im, str):
        return f"{re} + ({im})j" if im not in (0, 0.0, "0") else str(re)
    if abs(im) < 1e-300:
        return _g(re, digits)
    sign = "+" if im >= 0 else "-"
    return f"{_g(re, digits)} {sign} {_g(abs(im), digits)}j"


def cell_number(z, digits=None):
    """``[re, im]`` as a spreadsheet value: a float when real, the spreadsheet's own complex
    text (``'-1+2i'``, read by IMREAL/IMAGINARY) when complex, text when symbolic."""
    re, im = z
    if isinstance(re, str) or isinstance(im, str):
        return complex_text(z)
    nd = digits or 15                       # a spreadsheet keeps 15 significant digits
    if im == 0 or abs(im) <= 1e-14 * abs(re):
        return float(f"{re:.{digits}g}") if digits else float(re)
    r, i = f"{re:.{nd}G}", f"{abs(im):.{nd}G}"
    i = "" if i == "1" else i
    if re == 0:
        return f"{'-' if im < 0 else ''}{i}i"
    return f"{r}{'-' if im < 0 else '+'}{i}i"


# ------------------------------------------------------------------ modes
@dataclass(frozen=True)
class Mode:
    """A real pole or a complex-conjugate pair, as one row: ``sigma +- j omega_d``."""
    behaviour: str
    sigma: float
    omega_d: float
    multiplicity: int
    damping_ratio: float | None
    natural_frequency: float
    period: float | None
    time_constant: float | None
    decay_time: float | None
    poles: int                           # 1 for a real pole, 2 for a pair


def _behaviour(sigma: float, omega: float) -> str:
    if omega == 0:
        return "decay" if sigma < 0 else ("growth" if sigma > 0 else "integrator (pole at 0)")
    if sigma < 0:
        return "decaying oscillation"
    return "growing oscillation" if sigma > 0 else "steady oscillation"


def modes(poles) -> list[Mode]:
    """PoleInfo list -> one Mode per real pole or conjugate pair, slowest (rightmost) first."""
    out, used = [], set()
    items = list(poles)
    for i, p in enumerate(items):
        if i in used:
            continue
        z = complex(p.pole)
        tol = 1e-9 * max(1.0, abs(z))
        n = 1
        if abs(z.imag) > tol:                  # find the mirror image
            for j in range(i + 1, len(items)):
                if j not in used and abs(complex(items[j].pole) - z.conjugate()) <= tol:
                    used.add(j)
                    n = 2
                    break
        sigma, omega = z.real, abs(z.imag) if n == 2 or abs(z.imag) > tol else 0.0
        wn = abs(z)
        zeta = (-sigma / wn) if wn > 0 else None
        tau = -1.0 / sigma if sigma < 0 else None
        out.append(Mode(_behaviour(sigma, omega), sigma, omega, p.multiplicity, zeta, wn,
                        2 * math.pi / omega if omega > 0 else None, tau,
                        tau * LN50 if tau is not None else None, n))
    out.sort(key=lambda m: (-m.sigma, m.omega_d))
    return out


def zero_modes(zeros) -> list[tuple[float, float, int]]:
    """Zeros as (sigma, omega >= 0, count) with conjugates merged."""
    rows: list = []
    for z in zeros:
        z = complex(z)
        if z.imag < -1e-9 * max(1.0, abs(z)):
            continue
        key = (z.real, abs(z.imag))
        for r in rows:
            if abs(r[0] - key[0]) <= 1e-9 * max(1.0, abs(z)) and abs(r[1] - key[1]) <= 1e-9 * max(1.0, abs(z)):
                r[2] += 1
                break
        else:
            rows.append([key[0], key[1] if key[1] > 1e-9 * max(1.0, abs(z)) else 0.0, 1])
    return [tuple(r) for r in rows]


def input_words(inp) -> str:
    """'step' -> 'step response'; a U(s) text -> 'response to U(s) = 5/s'."""
    inp = "impulse" if inp is None else str(inp)
    if inp.lower() in ("impulse", "step", "ramp"):
        return f"{inp.lower()} response"
    return f"response to U(s) = {inp}"


def table(headers, rows) -> str:
    cols = [list(map(str, col)) for col in zip(headers, *rows)] if rows else [[h] for h in headers]
    widths = [max(len(x) for x in col) for col in cols]
    lines = ["  ".join(h.ljust(w) for h, w in zip(headers, widths)).rstrip(),
             "  ".join("-" * w for w in widths)]
    for row in rows:
        lines.append("  ".join(str(x).ljust(w) for x, w in zip(row, widths)).rstrip())
    return "\n".join(lines)


# ------------------------------------------------------------------ partial fractions, our layout
@dataclass(frozen=True)
class FractionRow:
    """One piece of a partial-fraction breakdown: a polynomial-part power, a real-pole term or a
    complex pair (both of its terms in one row, given by the pole with Im > 0)."""
    kind: str                  # 'polynomial part', 'real pole', 'complex pair'
    s_term: sp.Expr            # the piece in s
    t_term: sp.Expr            # its f(t) for t >= 0 (impulses for the polynomial part)
    pole: object               # SymPy number (None for the polynomial part)
    power: int                 # k of 1/(s - pole)^k, or of s^k in the polynomial part
    coefficient: sp.Expr


def _pair_real_form(pt):
    """A conjugate pair's two terms as one real fraction N(s)/D(s)^k."""
    from .engine.partfrac import pair_to_terms
    s = sp.Symbol("s")
    a, b = pair_to_terms(pt)
    num = sp.expand(a.coefficient * (s - b.pole) ** pt.order + b.coefficient * (s - a.pole) ** pt.order)
    den = sp.expand((s - a.pole) * (s - b.pole))
    return num / den ** pt.order


def fraction_rows(dec, scale=1) -> list[FractionRow]:
    """The rows of a decomposition (times ``scale``), polynomial part first."""
    from .engine.invert import pair_time_term
    from .engine.partfrac import pair_to_terms
    s, t = sp.Symbol("s"), sp.Symbol("t")
    rows = []
    for i, c in enumerate(dec.direct):
        if c != 0:
            rows.append(FractionRow("polynomial part", scale * c * s ** i,
                                    scale * c * (sp.DiracDelta(t) if i == 0 else sp.DiracDelta(t, i)),
                                    None, i, scale * c))
    for pt in dec.pair_terms:
        if pt.pair.sigma == -1:
            upper = next(x for x in pair_to_terms(pt) if sp.im(x.pole) > 0 or sp.im(x.pole).is_positive)
            rows.append(FractionRow("complex pair", scale * _pair_real_form(pt), scale * pair_time_term(pt),
                                    upper.pole, pt.order, scale * upper.coefficient))
            continue
        for term in pair_to_terms(pt):
            k = term.order
            rows.append(FractionRow("real pole", scale * term.coefficient / (s - term.pole) ** k,
                                    scale * term.coefficient * t ** (k - 1) / sp.factorial(k - 1)
                                    * sp.exp(term.pole * t), term.pole, k, scale * term.coefficient))
    return rows


def _s_text(F) -> str:
    """F(s) as human text: ^ for powers (the JSON keeps SymPy syntax)."""
    from .printing import to_display
    try:
        return to_display(F, digits=12).replace("**", "^")
    except Exception:            # noqa: BLE001 - an exotic node: SymPy's own text
        return sp.sstr(F).replace("**", "^")


def inversion(res, d, digits=6) -> str:
    from .printing import display_result, to_display
    closed = res.f_t is not None
    shown = display_result(res, digits=digits) if closed else (
        "(no finite closed form: a loop around a dead time; exact by the dead-time series, "
        "see 'sheetfuncs sample')" if getattr(res, "series", None) is not None else "(numerical only)")
    typed = " ".join(str(d.get("typed", "")).split())
    out = [f"F(s)   = {typed or _s_text(res.expr)}",
           f"f(t)   = {shown}"
           + ("   for t >= 0" if res.f_t is not None else ""),
           f"method : {res.method}"]
    for k, piece in enumerate(res.pieces or ()):
        dec = getattr(piece, "decomposition", None)
        if dec is None:
            continue
        rows = fraction_rows(dec, piece.gain)
        if not rows:
            continue
        delayed = piece.delay != 0
        T = _g(float(piece.delay), digits) if delayed else ""
        title = "partial fractions" + (f" of the part delayed by {T}: exp(-{T} s) times the terms in s"
                                       if delayed else "")
        shifted = sp.Symbol(f"(t - {_g(float(piece.delay), digits)})") if delayed else None

        def t_text(e):
            return to_display(e.subs(sp.Symbol("t"), shifted) if delayed else e, digits=digits)
        body = [(to_display(r.s_term, digits=digits), t_text(r.t_term), r.kind,
                 "" if r.pole is None else (complex_text(pair(r.pole), digits)
                                            .replace(" + ", " \u00b1 ") if r.kind == "complex pair"
                                            else complex_text(pair(r.pole), digits)),
                 r.power, complex_text(pair(r.coefficient), digits)) for r in rows]
        out += ["", title, table(("term in s", "f(t) term, t >= " + (T or "0"), "kind",
                                  "pole", "power", "coefficient"), body)]
        if k == 0 and any(r.kind == "complex pair" for r in rows):
            out.append("(a complex pair is one row: poles sigma \u00b1 j omega, both terms; pole and "
                       "coefficient shown for the pole with Im > 0)")
    if "check" in d:
        ck = d["check"]
        out += ["", f"self-check vs Talbot at t = {', '.join(_g(t, 4) for t in ck['times'])}: "
                    f"max deviation {ck['max_abs_deviation']:.2e} (relative {ck['max_rel_deviation']:.2e})"]
    if "excel" in d:
        out += ["", "spreadsheet formula: " + d["excel"]]
    if "latex" in d:
        out += ["", "LaTeX: " + d["latex"]]
    return "\n".join(out)


def samples(res, digits=6, input=None) -> str:
    rows = [(_g(float(t), digits), _g(float(y), digits)) for t, y in zip(res.t, res.y)]
    out = [table(("t", f"y ({input_words(input)})"), rows)]
    if res.impulses:
        out.append("impulses (not in y): " + ", ".join(
            f"{_g(i.weight, digits)}*delta{'^(%d)' % i.order if i.order else ''}(t - {_g(i.time, digits)})"
            for i in res.impulses))
    if res.numerical:
        est = f"; Talbot vs de Hoog differ by {res.error_estimate:.1e} (relative)" \
            if res.error_estimate is not None else ""
        out.append(f"values by {res.method}{est}")
    return "\n".join(out)


MODE_HEADS = ("mode", "behaviour", "sigma [1/s]", "omega_d [rad/s]", "damping ratio",
              "omega_n [rad/s]", "period [s]", "tau [s]", "2% decay [s]", "poles")


def mode_table(f, digits=6) -> str:
    rows = [(k + 1, m.behaviour, _g(m.sigma, digits), _g(m.omega_d, digits), _g(m.damping_ratio, digits),
             _g(m.natural_frequency, digits), _g(m.period, digits), _g(m.time_constant, digits),
             _g(m.decay_time, digits), f"{m.poles} x {m.multiplicity}" if m.multiplicity > 1 else m.poles)
            for k, m in enumerate(modes(f.poles))]
    return table(MODE_HEADS, rows)


def figures(f, digits=6) -> str:
    if f.poles:
        out = ["modes of F(s), slowest first (a complex pair is one mode: sigma \u00b1 j omega_d; "
               "omega_n natural frequency, tau time constant)",
               mode_table(f, digits)]
    elif "dead time" in f.stability or any("dead-time" in n for n in f.notes):
        out = ["modes of F(s): not listed (a loop around a dead time has infinitely many poles; "
               "stability from the characteristic equation)"]
    else:
        out = ["modes of F(s): none (no poles)" if f.stable is not None else
               "modes of F(s): not listed (F(s) is not rational)"]
    zs = zero_modes(f.zeros)
    if zs:
        out.append("zeros: " + ", ".join(
            (f"{_g(a, digits)} \u00b1 {_g(b, digits)}j" if b else _g(a, digits)) + (f" (x{n})" if n > 1 else "")
            for a, b, n in zs))
    out += ["", f"stability : {f.stability}", "", f"figures of the {input_words(f.input)}"]
    items = [("DC gain", f.dc_gain), ("initial value", f.initial_value), ("final value", f.final_value)]
    if f.input == "step":
        lo, hi = f.rise_band
        items += [(f"rise time ({lo:.0%} to {hi:.0%})", f.rise_time), ("peak time", f.peak_time),
                  ("peak value", f.peak_value), ("overshoot (%)", f.overshoot_percent),
                  (f"settling time ({f.settling_band:.0%} band)", f.settling_time)]
    w = max(len(k) for k, _ in items)
    out += [f"  {k.ljust(w)} : {_g(v, digits) if v is not None else 'none'}" for k, v in items]
    if f.final_value_note:
        out.append(f"note: {f.final_value_note}")
    out += [f"note: {n}" for n in f.notes]
    return "\n".join(out)


def ode(sol, digits=6) -> str:
    from .printing import display_result

    def show(r):
        return display_result(r, digits=digits) if r.f_t is not None else "(numerical only)"
    return "\n".join([f"Y(s)        = {_s_text(sol.Y_s)}",
                      f"y(t)        = {show(sol.y)}   for t >= 0",
                      f"free part   = {show(sol.free)}   (from the initial conditions)",
                      f"forced part = {show(sol.forced)}   (from the input)"])
