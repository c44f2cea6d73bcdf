"""Benchmarks, each run as ``python -m sheetfuncs.benchmarks.NAME`` (one process, side by side
with its reference, printing ratios): ``engine`` (against sympy.inverse_laplace_transform, and
``--startup`` against ``import sympy``), ``sampling`` (against scipy.signal.step), ``frequency``
(against scipy.signal.freqs), ``fill`` (cold and warm fills, faults).  Figures go in
docs/benchmarks.md; no timing assertions live in the tests."""
