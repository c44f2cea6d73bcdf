"""Transform pairs from Abramowitz & Stegun, table 29.3 (data only).

Source: M. Abramowitz and I. A. Stegun (eds.), *Handbook of Mathematical
Functions with Formulas, Graphs, and Mathematical Tables*, National Bureau of
Standards Applied Mathematics Series 55, first edition (1964), chapter 29
"Laplace Transforms", table 29.3 "Table of Laplace Transforms".

How the data was transcribed: FROM MEMORY.  No copy of the book is available
here, so both the pairs and their numbers are recalled, not copied.  Because
of that every pair is also checked on its own, independently of sheetfuncs,
by ``mpmath.invertlaplace`` (Talbot) -- or, for delayed pairs, where Talbot's
contour does not apply, by the forward integral with ``mpmath.quad`` -- in
``test_as_table.py``.  A pair that passes that check is a true transform
pair whatever its number; the numbers marked ``recall="uncertain"`` may be
off, and ``number=None`` means we cannot place the pair in the table at all.

Fields of each case:
  number  pair number in table 29.3 (text) or None
  pair    F(s) as published, SymPy syntax, parameters as letters
  f       f(t) as published, SymPy syntax
  values  the parameter values we chose to evaluate the pair (exact text)
  F       the same F(s) with those values, typed in sheetfuncs's syntax
  times   sample times (away from jumps), optional
  recall  "fair" or "uncertain" (how sure we are of the number)
"""

SOURCE = {
    "key": "A&S",
    "author": "M. Abramowitz, I. A. Stegun (eds.)",
    "title": "Handbook of Mathematical Functions with Formulas, Graphs, and Mathematical Tables",
    "edition": "NBS Applied Mathematics Series 55, 1st ed., 1964",
    "table": "29.3",
    "transcribed": "from memory; every pair cross-checked with mpmath",
}


def _c(number, pair, f, values, F, *, times=None, recall="fair"):
    return {"number": number, "pair": pair, "f": f, "values": values, "F": F,
            "times": times, "recall": recall}


CASES = [
    # -- powers of s ------------------------------------------------------
    _c("29.3.1", "1/s", "1", {}, "1/s"),
    _c("29.3.2", "1/s**2", "t", {}, "1/s^2"),
    _c("29.3.3", "1/s**n", "t**(n-1)/factorial(n-1)", {"n": "4"}, "1/s^4"),
    _c("29.3.4", "1/sqrt(s)", "1/sqrt(pi*t)", {}, "1/sqrt(s)"),
    _c("29.3.5", "s**(-3/2)", "2*sqrt(t/pi)", {}, "s^(-3/2)"),
    _c("29.3.6", "s**(-(n+1/2))", "2**n*t**(n-1/2)/(factorial2(2*n-1)*sqrt(pi))",
       {"n": "2"}, "s^(-2.5)"),
    _c("29.3.7", "gamma(k)/s**k", "t**(k-1)", {"k": "5/2"}, "0.75 sqrt(pi)/s^2.5"),
    # -- exponential shifts --------------------------------------------------
    _c("29.3.8", "1/(s+a)", "exp(-a*t)", {"a": "2"}, "1/(s+2)"),
    _c("29.3.8", "1/(s+a)", "exp(-a*t)", {"a": "-1.5"}, "1/(s-1.5)"),
    _c("29.3.9", "1/(s+a)**2", "t*exp(-a*t)", {"a": "3"}, "1/(s+3)^2"),
    _c("29.3.10", "1/(s+a)**n", "t**(n-1)*exp(-a*t)/factorial(n-1)", {"a": "1", "n": "3"},
       "1/(s+1)^3"),
    _c("29.3.11", "gamma(k)/(s+a)**k", "t**(k-1)*exp(-a*t)", {"a": "2", "k": "1/2"},
       "sqrt(pi)/sqrt(s+2)"),
    _c("29.3.12", "1/((s+a)*(s+b))", "(exp(-a*t)-exp(-b*t))/(b-a)", {"a": "1", "b": "4"},
       "1/((s+1)(s+4))"),
    _c("29.3.13", "s/((s+a)*(s+b))", "(a*exp(-a*t)-b*exp(-b*t))/(a-b)", {"a": "1", "b": "4"},
       "s/((s+1)(s+4))"),
    _c("29.3.14", "1/((s+a)*(s+b)*(s+c))",
       "-((b-c)*exp(-a*t)+(c-a)*exp(-b*t)+(a-b)*exp(-c*t))/((a-b)*(b-c)*(c-a))",
       {"a": "1", "b": "2", "c": "5"}, "1/((s+1)(s+2)(s+5))"),
    # -- trigonometric and hyperbolic ----------------------------------------
    _c("29.3.15", "1/(s**2+a**2)", "sin(a*t)/a", {"a": "2"}, "1/(s^2+4)"),
    _c("29.3.16", "s/(s**2+a**2)", "cos(a*t)", {"a": "3"}, "s/(s^2+9)"),
    _c("29.3.17", "1/(s**2-a**2)", "sinh(a*t)/a", {"a": "2"}, "1/(s^2-4)"),
    _c("29.3.18", "s/(s**2-a**2)", "cosh(a*t)", {"a": "0.5"}, "s/(s^2-0.25)"),
    _c("29.3.19", "1/(s*(s**2+a**2))", "(1-cos(a*t))/a**2", {"a": "2"}, "1/(s(s^2+4))"),
    _c("29.3.20", "1/(s**2*(s**2+a**2))", "(a*t-sin(a*t))/a**3", {"a": "2"}, "1/(s^2 (s^2+4))"),
    _c("29.3.21", "1/(s**2+a**2)**2", "(sin(a*t)-a*t*cos(a*t))/(2*a**3)", {"a": "1.5"},
       "1/(s^2+2.25)^2"),
    _c("29.3.22", "s/(s**2+a**2)**2", "t*sin(a*t)/(2*a)", {"a": "2"}, "s/(s^2+4)^2"),
    _c("29.3.23", "s**2/(s**2+a**2)**2", "(sin(a*t)+a*t*cos(a*t))/(2*a)", {"a": "2"},
       "s^2/(s^2+4)^2"),
    _c("29.3.24", "(s**2-a**2)/(s**2+a**2)**2", "t*cos(a*t)", {"a": "3"}, "(s^2-9)/(s^2+9)^2"),
    _c("29.3.25", "s/((s**2+a**2)*(s**2+b**2))", "(cos(a*t)-cos(b*t))/(b**2-a**2)",
       {"a": "1", "b": "3"}, "s/((s^2+1)(s^2+9))"),
    _c("29.3.26", "1/((s+a)**2+b**2)", "exp(-a*t)*sin(b*t)/b", {"a": "1", "b": "3"},
       "1/((s+1)^2+9)"),
    _c("29.3.26", "1/((s+a)**2+b**2)", "exp(-a*t)*sin(b*t)/b", {"a": "-1", "b": "2"},
       "1/((s-1)^2+4)"),
    _c("29.3.27", "(s+a)/((s+a)**2+b**2)", "exp(-a*t)*cos(b*t)", {"a": "0.5", "b": "2"},
       "(s+0.5)/((s+0.5)^2+4)"),
    # -- square roots, error functions, diffusion kernels ----------------------
    _c("29.3.44", "1/(s*sqrt(s+a))", "erf(sqrt(a*t))/sqrt(a)", {"a": "2"}, "1/(s sqrt(s+2))",
       recall="uncertain"),
    _c("29.3.45", "1/(sqrt(s)*(s-a))", "exp(a*t)*erf(sqrt(a*t))/sqrt(a)", {"a": "2"},
       "1/(sqrt(s) (s-2))", times=[0.1, 0.4, 0.8, 1.2, 1.7, 2.5], recall="uncertain"),
    _c("29.3.75", "exp(-k/s)/sqrt(s)", "cos(2*sqrt(k*t))/sqrt(pi*t)", {"k": "2"},
       "exp(-2/s)/sqrt(s)", recall="uncertain"),
    _c("29.3.82", "exp(-k*sqrt(s))", "k*exp(-k**2/(4*t))/(2*sqrt(pi*t**3))", {"k": "1.5"},
       "exp(-1.5 sqrt(s))", recall="uncertain"),
    _c("29.3.83", "exp(-k*sqrt(s))/s", "erfc(k/(2*sqrt(t)))", {"k": "1.5"},
       "exp(-1.5 sqrt(s))/s", recall="uncertain"),
    _c("29.3.84", "exp(-k*sqrt(s))/sqrt(s)", "exp(-k**2/(4*t))/sqrt(pi*t)", {"k": "1.5"},
       "exp(-1.5 sqrt(s))/sqrt(s)", recall="uncertain"),
    _c("29.3.85", "exp(-k*sqrt(s))/s**(3/2)",
       "2*sqrt(t/pi)*exp(-k**2/(4*t))-k*erfc(k/(2*sqrt(t)))", {"k": "1"},
       "exp(-sqrt(s))/s^(3/2)", recall="uncertain"),
    _c("29.3.88", "exp(-k*sqrt(s))/(sqrt(s)*(a+sqrt(s)))",
       "exp(a*k)*exp(a**2*t)*erfc(a*sqrt(t)+k/(2*sqrt(t)))", {"a": "1", "k": "1"},
       "exp(-sqrt(s))/(sqrt(s) (1+sqrt(s)))", recall="uncertain"),
    # -- logarithm, arctangent, delay -------------------------------------------
    _c(None, "log((s-a)/(s-b))", "(exp(b*t)-exp(a*t))/t", {"a": "-3", "b": "-1"},
       "log((s+3)/(s+1))", recall="uncertain"),
    _c(None, "atan(k/s)", "sin(k*t)/t", {"k": "2"}, "atan(2/s)", recall="uncertain"),
    _c(None, "exp(-k*s)/s", "Heaviside(t-k)", {"k": "2"}, "exp(-2s)/s",
       times=[0.3, 1.0, 1.9, 2.1, 3.0, 5.0], recall="uncertain"),
    _c(None, "exp(-k*s)/s**2", "(t-k)*Heaviside(t-k)", {"k": "0.5"}, "exp(-0.5s)/s^2",
       times=[0.2, 0.45, 0.55, 1.0, 2.0, 4.0], recall="uncertain"),
]
