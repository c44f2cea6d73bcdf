"""The ``sheetfuncs`` command: argument parsing, engine calls and printing only.

Every command takes ``--json``.  Errors end as one ``error: ...`` line on
stderr (and ``{"error": ...}`` on stdout with ``--json``), exit status 2.
"""
from __future__ import annotations

import argparse
import json
import sys

from . import __version__
from .errors import SheetfuncsError

EXIT_USAGE = 2


class _UsageError(SheetfuncsError):
    pass


class _Parser(argparse.ArgumentParser):
    def error(self, message):          # one line, no usage block
        raise _UsageError(message)


def _params(items) -> dict:
    """--param NAME=VALUE or 'NAME [unit]=VALUE': the unit converts the value to SI (pint); values
    may carry SI prefixes (R=10k, C=22n)."""
    from . import units
    out, where = {}, {}
    for item in items or []:
        if "=" not in item:
            raise _UsageError(f"--param needs NAME=VALUE, got '{item}'")
        label, value = item.split("=", 1)
        name, unit = units.label_of(label)
        if name in where:
            raise _UsageError(f"--param {name} is given twice ('{where[name]}' and '{item}')")
        where[name] = item
        out[name] = units.to_si(value.strip(), unit) if unit else value.strip()
    return out


def _floats(text: str, what: str) -> list[float]:
    try:
        return [float(x) for x in text.split(",") if x.strip()]
    except ValueError as exc:
        raise _UsageError(f"{what} must be numbers separated by commas, got '{text}'") from exc


def _items(text: str) -> list[str]:
    return [x.strip() for x in text.split(",")] if text.strip() else []


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="sheetfuncs", description="s-domain toolkit: inverse Laplace transforms, "
                "partial fractions, poles, sampled responses and response figures.")
    p.add_argument("--version", action="version", version=f"sheetfuncs {__version__}")
    sub = p.add_subparsers(dest="command", parser_class=_Parser, metavar="COMMAND")

    def common(sp_, expr=True):
        if expr:
            sp_.add_argument("expr", metavar="EXPR", help="F(s), e.g. '(s+3)/(s^2+2s+5)'")
        sp_.add_argument("--param", action="append", metavar="NAME=VALUE",
                         help="parameter value: R=10k, 'C [nF]=22' (unit in brackets, to SI)")
        sp_.add_argument("--json", action="store_true", help="print JSON")
        sp_.add_argument("--digits", type=int, default=None, help="significant digits of numbers")
        sp_.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)

    c = sub.add_parser("invert", help="inverse transform f(t) with its partial fractions")
    common(c)
    c.add_argument("--check", action="store_true", help="compare with a numerical inversion")
    c.add_argument("--excel", metavar="CELL", help="also print a spreadsheet formula in CELL")
    c.add_argument("--latex", action="store_true", help="also print LaTeX")

    c = sub.add_parser("sample", help="sampled response y(t)")
    common(c)
    c.add_argument("--times", help="comma-separated times")
    c.add_argument("--from", dest="start", type=float)
    c.add_argument("--to", dest="stop", type=float)
    c.add_argument("--n", type=int)
    c.add_argument("--input", default="impulse", help="impulse, step, ramp or U(s)")

    c = sub.add_parser("figures", help="poles, stability, gains and step-response figures")
    common(c)
    c.add_argument("--input", default="step", help="impulse, step, ramp or U(s)")
    c.add_argument("--band", type=float, default=0.02,
                   help="settling band, a fraction of the final value (default 0.02); cells: band")
    c.add_argument("--rise", default="0.1,0.9", help="rise-time levels LOW,HIGH (default 0.1,0.9)")

    c = sub.add_parser("ode", help="solve a linear ODE with initial conditions by the Laplace route")
    common(c, expr=False)
    c.add_argument("--coeffs", required=True, help="a_n,...,a_1,a_0 (highest derivative first)")
    c.add_argument("--initial", default="", help="y(0),y'(0),...")
    c.add_argument("--input", default=None, help="U(s), the transformed input")
    c.add_argument("--input-t", default=None, help="u(t), the input as a time signal")

    c = sub.add_parser("fill", help="compute the sheetfuncs cells of workbooks headlessly")
    c.add_argument("books", nargs="+", metavar="BOOK", help=".xlsx/.xlsm files or folders")
    c.add_argument("-o", "--output", help="output file (one book) or folder")
    c.add_argument("--in-place", action="store_true",
                   help="fill the file itself (the first BOOK.bak is kept; exit 0 all filled, "
                        "1 some cells hold errors, 2 nothing written)")
    c.add_argument("--no-cache", action="store_true", help="do not use the persistent result cache")
    c.add_argument("--json", action="store_true", help="print JSON")
    c.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)

    c = sub.add_parser("demo", help="copy the example workbooks to DIR, fill them, show key figures")
    c.add_argument("dir", nargs="?", default=None, metavar="DIR",
                   help="folder to create (default: a new sheetfuncs-demo folder here)")
    c.add_argument("--json", action="store_true", help="print JSON")
    c.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)

    c = sub.add_parser("transform", help="forward transform of a time signal")
    c.add_argument("signal", metavar="SIGNAL", help="e.g. 'exp(-2t) sin(3t)', 'u(t) - u(t-1)'")
    common(c, expr=False)

    c = sub.add_parser("frequency", help="frequency response F(jw) and its figures (bandwidth, peak ...)")
    common(c)
    c.add_argument("--omega", help="comma-separated frequencies (rad/s, or Hz with --hz)")
    c.add_argument("--from", dest="start", type=float, help="first frequency of a log grid")
    c.add_argument("--to", dest="stop", type=float, help="last frequency of a log grid")
    c.add_argument("--n", type=int, help="number of grid points")
    c.add_argument("--hz", action="store_true", help="grid and human output in Hz (JSON stays in rad/s)")

    c = sub.add_parser("margins", help="loop figures of an open loop L(s): margins, crossovers, Nyquist stability")
    common(c)
    c.add_argument("--hz", action="store_true", help="human output in Hz (JSON stays in rad/s)")

    c = sub.add_parser("loop", help="loop algebra: L, closed loop, sensitivity, effort, disturbance response")
    common(c, expr=False)
    c.add_argument("--plant", required=True, metavar="G", help="plant G(s)")
    c.add_argument("--controller", metavar="C", default=None, help="controller C(s) (default 1)")
    c.add_argument("--sensor", metavar="H", default=None, help="sensor H(s) in the feedback path (default 1)")
    c = sub.add_parser("libreoffice", help="add the SF_ functions to LibreOffice Calc, or take them out")
    c.add_argument("action", choices=("install", "remove"),
                   help="install (or update) the extension, or remove it")
    c.add_argument("--profile", metavar="DIR", help="LibreOffice user profile folder "
                   "(as in -env:UserInstallation=file://DIR; created if needed); default: the current user's")
    c.add_argument("--json", action="store_true", help="print JSON")
    c.add_argument("--debug", action="store_true", help=argparse.SUPPRESS)
    return p


def _safe_streams() -> None:
    """Never crash on a console that cannot encode a character (a Windows code page,
    redirected output): unencodable characters print as escapes."""
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.reconfigure(errors="backslashreplace")
        except (AttributeError, ValueError):      # not a text stream we can reconfigure
            pass


def main(argv=None) -> int:
    _safe_streams()
    argv = list(sys.argv[1:] if argv is None else argv)
    want_json = "--json" in argv
    debug = "--debug" in argv
    try:
        args = build_parser().parse_args(argv)
        if not args.command:
            raise _UsageError("give a command: invert, sample, figures, ode or transform "
                              "(sheetfuncs --help lists them)")
        out = _run(args)
    except _Partial as exc:          # results already printed; say what failed
        print(f"error: {exc}", file=sys.stderr)
        return exc.status
    except SheetfuncsError as exc:
        return _fail(str(exc), want_json)
    except KeyboardInterrupt:
        return _fail("interrupted", want_json)
    except Exception as exc:  # noqa: BLE001 - last line of defence: one line, no traceback
        if debug:
            raise
        return _fail(f"internal error ({type(exc).__name__}: {exc}); please report it", want_json)
    try:
        if want_json:
            print(json.dumps(out, allow_nan=False))
        else:
            print(out)
        sys.stdout.flush()
    except BrokenPipeError:         # the reader went away (| head): no traceback
        import os
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    return 0


def _need_fill_libraries() -> None:
    """fill and demo need the [fill] extra (openpyxl, lxml); say so in one line."""
    import importlib.util
    missing = [m for m in ("openpyxl", "lxml") if importlib.util.find_spec(m) is None]
    if missing:
        raise _UsageError(f"this command needs {' and '.join(missing)}: install them with "
                          "python3 -m pip install 'sheetfuncs[fill]'")


def _fill(args):
    """Exit status: 0 every cell of ours filled; 1 output written but some cells hold
    errors (or some books of several failed); 2 nothing written."""
    _need_fill_libraries()
    from .fill import ERRORS_IN_FULL, fill_many
    if args.in_place and args.output:
        raise _UsageError("give either --in-place or -o, not both")
    reports, failures = fill_many(args.books, args.output, in_place=args.in_place,
                                  use_cache=not args.no_cache, progress=sys.stderr.isatty())
    failures = [(f, e if f in e else f"{f}: {e}") for f, e in failures]    # the path once
    if failures and not reports and len(failures) == 1:
        raise SheetfuncsError(failures[0][1])
    notes = list(dict.fromkeys(w for r in reports for w in r.warnings))
    for note in notes:
        print(f"warning: {note}", file=sys.stderr)
    if args.json:
        out = {"filled": [r.to_dict() for r in reports],
               "failed": [{"file": f, "error": e} for f, e in failures], "warnings": notes}
    else:
        lines = []
        for r in reports:
            lines.append(f"{r.output}: {r.cells} cells ({r.errors} with errors, {r.spilled} spilled, "
                         f"{r.cache_hits} from cache) in {r.seconds:.2f} s")
            if r.backup:
                lines.append(f"  backup: {r.backup}" + (" (kept from an earlier run: the first backup "
                                                          "is never replaced)" if r.backup_kept else ""))
            lines += [f"  {c}: {e}" for c, e in r.error_cells]
            rest = r.error_names[ERRORS_IN_FULL:]
            if rest:
                shown = ", ".join(rest[:20]) + (f" and {len(rest) - 20} more" if len(rest) > 20 else "")
                lines.append(f"  also with errors: {shown}")
            if r.natives_not_computed:
                first = "; ".join(f"{c} ({w})" for c, w in r.natives_not_computed[:3])
                more = len(r.natives_not_computed) - 3
                lines.append(f"  {len(r.natives_not_computed)} native formulas left for the spreadsheet "
                             f"to compute: {first}" + (f" and {more} more" if more > 0 else ""))
        lines += [f"error: {e}" for f, e in failures]
        out = "\n".join(lines)
    bad_cells = sum(r.errors for r in reports)
    if failures or bad_cells:
        print(json.dumps(out) if args.json else out)
        why = []
        if bad_cells:
            why.append(f"{bad_cells} cell{'s hold' if bad_cells != 1 else ' holds'} errors")
        if failures:
            why.append(f"{len(failures)} of {len(failures) + len(reports)} workbooks failed "
                       "(not written)")
        raise _Partial("; ".join(why), status=1 if reports else EXIT_USAGE)
    return out


class _Partial(SheetfuncsError):
    """Results already printed; the message says what failed; ``status`` is the exit status."""

    def __init__(self, message: str, status: int = EXIT_USAGE):
        super().__init__(message)
        self.status = status


def _fail(message: str, want_json: bool) -> int:
    print(f"error: {message}", file=sys.stderr)
    if want_json:
        print(json.dumps({"error": message}))
    return EXIT_USAGE


def _run(args):
    if args.command == "fill":
        return _fill(args)
    if args.command == "libreoffice":
        from .calcext import install as lo
        text = lo.install(args.profile) if args.action == "install" else lo.remove(args.profile)
        return {"result": text} if args.json else text
    if args.command == "demo":
        _need_fill_libraries()
        from .demo import run_demo
        result = run_demo(args.dir)
        return result.to_dict() if args.json else result.text()
    from . import api
    params = _params(args.param)
    if not args.json:
        from . import report
    if args.digits is not None and not 1 <= args.digits <= 30:
        raise _UsageError("--digits must be between 1 and 30")
    if args.command == "invert":
        res = api.invert(args.expr, params)
        d = res.to_dict(digits=args.digits)
        if args.check and res.f_t is not None:
            d["check"] = api.self_check(res).to_dict()
        if args.excel:
            d["excel"] = api.excel_formula(res, args.excel)          # always full precision
        if args.latex:
            d["latex"] = api.latex(res, digits=args.digits)
        return d if args.json else report.inversion(res, dict(d, typed=args.expr),
                                                     digits=args.digits or 6)
    if args.command == "sample":
        times = _floats(args.times, "--times") if args.times else None
        if times is None and None in (args.start, args.stop, args.n):
            raise _UsageError("sample needs --times T1,T2,... or --from A --to B --n N")
        res = api.sample(args.expr, times, start=args.start, stop=args.stop, n=args.n,
                         input=args.input, params=params)
        d = res.to_dict()
        return d if args.json else report.samples(res, digits=args.digits or 6, input=args.input)
    if args.command == "figures":
        rise = _floats(args.rise, "--rise")
        if len(rise) != 2:
            raise _UsageError("--rise takes two levels, e.g. 0.1,0.9")
        res = api.figures(args.expr, params, input=args.input, band=args.band, rise=tuple(rise))
        return res.to_dict() if args.json else report.figures(res, digits=args.digits or 6)
    if args.command == "ode":
        res = api.solve_ode(_items(args.coeffs), _items(args.initial), args.input, params,
                            input_t=args.input_t)
        d = res.to_dict(digits=args.digits)
        return d if args.json else report.ode(res, digits=args.digits or 6)
    if args.command == "transform":
        F = api.transform(args.signal, params)
        d = {"F_s": api.s_text(F)}
        return d if args.json else f"F(s) = {d['F_s']}"
    if args.command in ("frequency", "margins", "loop"):
        return _frequency_commands(args, params)
    raise _UsageError(f"unknown command {args.command}")


def _frequency_commands(args, params):
    from . import freqreport
    from .engine import frequency, loops
    digits = args.digits or 6
    if args.command == "frequency":
        omega = _floats(args.omega, "--omega") if args.omega else None
        if omega is None and None in (args.start, args.stop, args.n):
            raise _UsageError("frequency needs --omega W1,W2,... or --from A --to B --n N")
        res = frequency.frequency_response(args.expr, omega, start=args.start, stop=args.stop, n=args.n,
                                           hz=args.hz, params=params)
        return res.to_dict() if args.json else freqreport.frequency(res, hz=args.hz, digits=digits)
    if args.command == "margins":
        res = loops.margins(args.expr, params)
        return res.to_dict() if args.json else freqreport.margins(res, hz=args.hz, digits=digits)
    res = loops.close_loop(args.plant, args.controller, args.sensor, params)
    return res.to_dict() if args.json else freqreport.loop(res)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
