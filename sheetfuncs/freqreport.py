"""Human text for the frequency, margins and loop commands."""
from __future__ import annotations

import math

from .report import table

TWO_PI = 2.0 * math.pi


def _g(x, digits=6, suffix=""):
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, float) and not math.isfinite(x):
        return "-"
    return f"{x:.{digits}g}{suffix}"


def _f(w, hz):
    return None if w is None else (w / TWO_PI if hz else w)


def frequency(res, *, hz=False, digits=6) -> str:
    unit = "Hz" if hz else "rad/s"
    rows = [(_g(_f(w, hz), digits), _g(m, digits), _g(db, digits), _g(p, digits), _g(gd, digits))
            for w, m, db, p, gd in zip(res.omega, res.magnitude, res.magnitude_db, res.phase_deg, res.group_delay)]
    out = [table((f"frequency ({unit})", "|F|", "|F| (dB)", "phase (deg)", "group delay (s)"), rows), ""]
    out.append(figures(res.figures, hz=hz, digits=digits))
    return "\n".join(out)


def figures(f, *, hz=False, digits=6) -> str:
    unit = " Hz" if hz else " rad/s"
    lines = [f"DC gain              : {_g(f.dc_gain, digits)} ({_g(f.dc_gain_db, digits)} dB)",
             f"-3 dB bandwidth      : {_g(_f(f.bandwidth, hz), digits, unit)}",
             f"resonant peak        : {_g(f.peak_db, digits, ' dB')} at {_g(_f(f.peak_frequency, hz), digits, unit)}"
             if f.peak is not None else "resonant peak        : none above the DC gain"]
    if f.band_edges:
        lo, hi = f.band_edges
        lines.append(f"-3 dB band edges     : {_g(_f(lo, hz), digits)} to {_g(_f(hi, hz), digits)}{unit}")
    lines.append(f"high-frequency slope : {_g(f.hf_rolloff_db_per_decade, digits, ' dB/decade')}")
    if f.sections:
        rows = [(s.kind, "pair" if s.order == 2 else "real", _g(_f(s.natural_frequency, hz), digits),
                 _g(s.damping_ratio, digits), _g(s.q, digits)) for s in f.sections]
        lines += ["", table(("roots", "section", f"natural freq. ({unit.strip()})", "damping ratio", "Q"), rows)]
    lines += [f"note: {n}" for n in f.notes]
    return "\n".join(lines)


def margins(m, *, hz=False, digits=6) -> str:
    unit = " Hz" if hz else " rad/s"
    stable = {True: "stable", False: "UNSTABLE", None: "not decided"}[m.closed_loop_stable]
    lines = [f"gain crossover       : {_g(_f(m.gain_crossover, hz), digits, unit)}",
             f"phase margin         : {_g(m.phase_margin_deg, digits, ' deg')}",
             f"phase crossover      : {_g(_f(m.phase_crossover, hz), digits, unit)}",
             f"gain margin          : {_g(m.gain_margin_db, digits, ' dB')}",
             f"delay margin         : {_g(m.delay_margin, digits, ' s')}",
             f"peak sensitivity     : {_g(m.peak_sensitivity, digits)}"
             + (f" at {_g(_f(m.peak_sensitivity_frequency, hz), digits, unit)}" if m.peak_sensitivity else ""),
             f"closed loop          : {stable}"]
    if m.open_loop_rhp_poles is not None:
        lines.append(f"Nyquist count        : open-loop RHP poles P = {m.open_loop_rhp_poles}, "
                     f"clockwise encirclements of -1 N = {_g(m.encirclements)}, "
                     f"closed-loop RHP poles Z = {_g(m.closed_loop_rhp_poles)}")
    if len(m.gain_crossovers) > 1:
        lines.append("all gain crossovers  : " + ", ".join(_g(_f(w, hz), digits) for w in m.gain_crossovers))
    if len(m.phase_crossovers) > 1:
        lines.append("phase crossovers     : " + ", ".join(_g(_f(w, hz), digits) for w in m.phase_crossovers[:8])
                     + (" ..." if len(m.phase_crossovers) > 8 else ""))
    lines += [f"note: {n}" for n in m.notes]
    lines.append("Results support engineering judgement; safety-relevant designs follow local codes and "
                 "licensed review.")
    return "\n".join(lines)


def loop(a) -> str:
    lines = [f"loop L = C G H            : {a.loop}",
             f"closed loop T = CG/(1+L)  : {a.closed}",
             f"sensitivity S = 1/(1+L)   : {a.sensitivity}",
             f"controller effort C/(1+L) : {a.effort}",
             f"disturbance G/(1+L)       : {a.disturbance}"]
    for c in a.cancellations:
        lines.append(f"cancellation: {c}")
    for z in a.rhp_zeros:
        lines.append(f"warning: {z}")
    lines += [f"note: {n}" for n in a.notes]
    return "\n".join(lines)
