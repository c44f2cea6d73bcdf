"""Tests of sheetfuncs.templates: the generated calculation workbooks.

(a) The generator's output read back with openpyxl/zipfile: deterministic, four
files, only known SF_ functions with valid argument counts, plain formulas,
sampled tables of >= 200 rows, a chart, cautions, one-page print setup, empty
room for every spilling table.
(b) Each template filled by ``sheetfuncs.fill`` and opened in the real
LibreOffice (two soffice calls for all four: CSV of every sheet, PDF).  What
LibreOffice shows is compared with references computed here: the engine's own
``sample``/``figures`` called directly, and outside the project scipy.signal
(step/impulse of the same rational models), textbook second-order and two-lag
formulas with scipy's brentq, mpmath's de Hoog inversion, a Fourier series and
scipy.special.erfc for the slab.
"""
from __future__ import annotations

import csv
import inspect
import math
import re
import shutil
import subprocess
import zipfile
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import mpmath
import numpy as np
import openpyxl
import pytest
from openpyxl.formula.tokenizer import Token, Tokenizer
from openpyxl.worksheet.formula import ArrayFormula
from scipy import signal, special
from scipy.linalg import expm
from scipy.optimize import brentq

import sheetfuncs
from sheetfuncs import cellfuncs, templates
from tests import lo

NAMES = ["rlc_step_response", "mount_release", "dead_time_process", "slab_heating"]
SHEETS = ["Calculation", "Chart", "Response"]
ERROR_MARKS = ("#NAME?", "#VALUE!", "Err:", "#SF!", "#REF!", "#DIV/0!", "#N/A", "#NUM!")
RTOL = 1e-9


# ------------------------------------------------------------------ helpers
@pytest.fixture(scope="module")
def built(tmp_path_factory) -> list[Path]:
    return templates.build_all(tmp_path_factory.mktemp("templates"))


@pytest.fixture(scope="module")
def info() -> dict:
    return {d["name"]: d for d in templates.describe()}


def _load(path):
    return openpyxl.load_workbook(path)


def _rc(cell: str) -> tuple[int, int]:
    m = re.fullmatch(r"\$?([A-Z]+)\$?(\d+)", cell)
    col = 0
    for ch in m.group(1):
        col = col * 26 + ord(ch) - 64
    return int(m.group(2)), col


def _formulas(wb):
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                v = c.value
                if isinstance(v, ArrayFormula) or (isinstance(v, str) and v.startswith("=")):
                    yield ws.title, c.coordinate, v


def _sf_calls(formula: str) -> list[tuple[str, int]]:
    """(function, number of arguments) of every SF_ call, by openpyxl's tokenizer."""
    out, stack = [], []
    toks = [t for t in Tokenizer(formula).items if t.type != Token.WSPACE]
    for i, t in enumerate(toks):
        if t.type == Token.FUNC and t.subtype == Token.OPEN:
            empty = i + 1 < len(toks) and toks[i + 1].type == Token.FUNC and toks[i + 1].subtype == Token.CLOSE
            stack.append([t.value[:-1], 0 if empty else 1])
        elif t.type == Token.SEP and t.subtype == Token.ARG and stack:
            stack[-1][1] += 1
        elif t.type == Token.FUNC and t.subtype == Token.CLOSE:
            name, n = stack.pop()
            if name.upper().startswith("SF_"):
                out.append((name, n))
    return out


def _inputs(wb, params_range: str | None) -> dict:
    """name -> value from a two-column range ('R', 'tau1 [s]') or from the defined names."""
    ws = wb["Calculation"]
    out = {}
    if params_range:
        for name, value in ws[params_range]:
            out[re.match(r"\s*([A-Za-z][A-Za-z0-9]*)", name.value).group(1)] = float(value.value)
        return out
    for name, dn in wb.defined_names.items():
        sheet, ref = next(iter(dn.destinations))
        out[name] = float(wb[sheet][ref.replace("$", "")].value)
    return out


def _close(shown, ref, rtol=RTOL, atol=0.0, what=""):
    shown, ref = np.asarray(shown, float), np.asarray(ref, float)
    bad = ~np.isclose(shown, ref, rtol=rtol, atol=atol)
    assert not bad.any(), (f"{what}: {bad.sum()} values differ, first at index {np.argmax(bad)}: "
                           f"shown {shown[bad][0]!r}, reference {ref[bad][0]!r}")


# ------------------------------------------------------------------ (a) generator
def test_generator_is_deterministic_and_writes_four_files(built, tmp_path):
    assert [p.name for p in built] == [f"{n}.xlsx" for n in NAMES]
    again = templates.build_all(tmp_path)
    assert [p.name for p in again] == [p.name for p in built]
    for a, b in zip(built, again):
        assert a.read_bytes() == b.read_bytes(), f"{a.name} differs between two builds"
    readme = (tmp_path / "README.md").read_text(encoding="utf-8")
    assert all(f"{n}.xlsx" in readme for n in NAMES) and "licensed review" in readme
    assert set(templates.TEMPLATES) == set(NAMES)
    for p in built:
        wb = _load(p)
        assert wb.sheetnames == SHEETS
        assert wb.properties.creator == "sheetfuncs"
        assert wb.properties.created == templates.FIXED_TIME == wb.properties.modified


def test_committed_workbooks_are_the_generator_output(built):
    folder = Path(__file__).resolve().parents[2] / "workbooks"
    if not folder.is_dir():
        pytest.skip("no workbooks/ folder in this checkout")
    for p in built:
        assert (folder / p.name).read_bytes() == p.read_bytes(), \
            f"workbooks/{p.name} is stale: run python -m sheetfuncs.templates"
    assert (folder / "README.md").read_text(encoding="utf-8") == templates.readme(templates.describe())


def test_every_sf_formula_is_known_plain_and_well_formed(built):
    total = 0
    for p in built:
        wb = _load(p)
        for sheet, ref, f in _formulas(wb):
            where = f"{p.name} {sheet}!{ref}"
            assert not isinstance(f, ArrayFormula), f"{where} is an array formula"
            assert "_xlfn" not in f.lower() and "_xludf" not in f.lower(), where
            for name, n in _sf_calls(f):
                assert name in cellfuncs.FUNCTIONS, f"{where}: unknown function {name}"
                try:
                    inspect.signature(cellfuncs.FUNCTIONS[name]).bind(*([None] * n))
                except TypeError:
                    pytest.fail(f"{where}: {name} with {n} arguments")
                total += 1
        with zipfile.ZipFile(p) as z:
            for member in z.namelist():
                if member.startswith("xl/worksheets/sheet"):
                    xml = z.read(member).decode()
                    assert 't="array"' not in xml and 't="shared"' not in xml, f"{p.name} {member}"
    assert total > 800


def test_sampled_tables_have_200_rows_one_plain_formula_each(built, info):
    for p in built:
        d = info[p.stem]["response"]
        ws = _load(p)["Response"]
        first, last = d["first_row"], d["last_row"]
        assert last - first + 1 >= 200
        for k, r in enumerate(range(first, last + 1)):
            assert ws[f"A{r}"].value.replace(" ", "") == f"=$B$3+{k}*$B$4"
            for col in d["y"]:
                f = ws[f"{col}{r}"].value
                assert isinstance(f, str) and f.startswith("="), f"{p.name} Response!{col}{r}"
                assert re.search(rf"(?<![$A-Z])[AB]{r}(?![0-9])", f), f"{col}{r} does not use its row"
        assert ws[f"A{last + 1}"].value is None


def test_chart_sheet_titles_and_page_setup(built):
    for p in built:
        wb = _load(p)
        charts = wb["Chart"]._charts
        assert len(charts) == 1, p.name
        with zipfile.ZipFile(p) as z:
            xml = "".join(z.read(m).decode() for m in z.namelist() if m.startswith("xl/charts/chart"))
        assert re.search(r"'?Response'?!\$A\$7:\$A\$207", xml), p.name
        titles = re.findall(r"<a:t>([^<]*)</a:t>", xml)
        assert len(titles) >= 3 and sum("[" in t and "]" in t for t in titles) >= 2, titles
        for ws in wb.worksheets:
            assert ws.sheet_properties.pageSetUpPr.fitToPage is True, f"{p.name} {ws.title}"
            assert ws.page_setup.fitToWidth == 1 and int(ws.page_setup.paperSize) == int(ws.PAPERSIZE_A4)
            assert "&A" in ws.oddFooter.center.text                  # the sheet name on every page
        assert wb["Chart"].page_setup.fitToHeight == 1
        calc, resp = wb["Calculation"], wb["Response"]
        assert calc.page_setup.orientation == "landscape" and calc.page_setup.fitToHeight == 0
        assert re.search(rf"!\$A\$1:\${templates.COLS[-1]}\$\d+$", calc.print_area)
        assert resp.page_setup.fitToHeight == 0                        # 201 rows over several pages
        assert resp.print_title_rows == f"${templates.R_HEAD}:${templates.R_HEAD}"


def test_number_formats_are_fixed_or_engineering(built):
    """No plain scientific notation for a figure: fixed decimals or engineering (exponent a
    multiple of 3); scientific only for tiny deviations (self-check)."""
    for p in built:
        wb = _load(p)
        ws = wb["Calculation"]
        for row in ws.iter_rows():
            for c in row:
                fmt = c.number_format
                if "E" in fmt and isinstance(c.value, str) and c.value.startswith("=SF_FIGURE"):
                    assert fmt.startswith("##0."), f"{p.name} {c.coordinate}: {fmt}"
        for r in range(templates.R_FIRST, templates.R_FIRST + 3):
            assert wb["Response"][f"A{r}"].number_format == templates.ENG


def test_cautions_near_the_top_and_names_excel_accepts(built):
    cell_like = re.compile(r"^[A-Za-z]{1,3}[0-9]+$|^[RrCc]$|^[Rr][0-9]*[Cc][0-9]*$")
    for p in built:
        wb = _load(p)
        ws = wb["Calculation"]
        top = " ".join(str(ws.cell(r, 1).value) for r in range(1, 6))
        assert "CAUTION" in top and "licensed review" in top, p.name
        for name, dn in wb.defined_names.items():
            assert not cell_like.match(name), f"{p.name}: defined name {name} looks like a cell"
            sheet, ref = next(iter(dn.destinations))
            assert isinstance(wb[sheet][ref.replace("$", "")].value, (int, float))


def test_tables_are_one_formula_per_cell(built):
    # a table is held as its per-cell form (row, col of the table in each cell), so that it is
    # recomputed in place live (no spill range, no stale neighbours); its room holds every
    # column of the layout
    from sheetfuncs.templates import BLOCK_ROOM, TABLE_ROOM, cell_form
    assert TABLE_ROOM[1] >= max(len(cellfuncs.PARTFRAC_HEADS), len(cellfuncs.POLES_HEADS))
    room = {"SF_PARTFRAC": TABLE_ROOM, "SF_POLES": TABLE_ROOM, "SF_FIGURES": BLOCK_ROOM}
    seen = 0
    for p in built:
        wb = _load(p)
        for sheet, ref, f in _formulas(wb):
            fn = re.match(r"=\s*(SF_[A-Z_]+)\((.*),1,1\)$", str(f))
            if not fn or fn.group(1) not in room:
                continue
            ws, (r0, c0) = wb[sheet], _rc(ref)
            array_form = f"={fn.group(1)}({fn.group(2)})".replace(',""', "")
            rows, cols = room[fn.group(1)]
            merged = {cell for m in ws.merged_cells.ranges for cell in m.cells}
            for r in range(r0, r0 + rows):
                for c in range(c0, c0 + cols):
                    assert ws.cell(r, c).value == cell_form(array_form, r - r0 + 1, c - c0 + 1), (p.name, r, c)
                    assert (r, c) not in merged, f"{p.name} {sheet}: {ref} table over merged cells"
            seen += 1
    assert seen == 8            # 3 + 3 + 2 + 0 tables and blocks


def test_describe_points_at_the_right_cells(built, info):
    for p in built:
        wb = _load(p)
        d = info[p.stem]
        assert d["title"] == wb["Calculation"]["A1"].value and d["figures"]
        for f in d["figures"]:
            v = wb[f["sheet"]][f["cell"]].value
            if "pole" in f:                        # a cell of the poles table (filled by the spill)
                anchor = wb[f["sheet"]].cell(_rc(f["cell"])[0] - 1, 1).value
                assert anchor.startswith("=SF_POLES(")
            else:
                assert isinstance(v, str) and v.startswith("="), (p.name, f)


# ------------------------------------------------------------------ (b) filled, in LibreOffice
def _fill_one(src: str, dst: str) -> str:
    from sheetfuncs.fill import fill_workbook
    report = fill_workbook(src, dst, use_cache=False)
    if report.errors:
        raise AssertionError(f"{src}: fill reported errors {report.error_cells}")
    return dst


def _convert_all(paths, target: str, outdir: Path) -> Path:
    """One soffice call for all paths (the harness's private runner, same profile handling)."""
    outdir.mkdir(parents=True, exist_ok=True)
    res = lo._soffice(["--convert-to", target, "--outdir", str(outdir), *map(str, paths)])
    if res.returncode != 0:
        raise lo.LibreOfficeError(f"soffice failed ({res.returncode}): {res.stderr[-500:]}")
    return outdir


@pytest.fixture(scope="module")
def shown(built, tmp_path_factory):
    try:
        import sheetfuncs.fill  # noqa: F401
    except ImportError as exc:
        pytest.skip(f"sheetfuncs.fill cannot be imported ({exc}); the fill tests need it")
    lo.require_soffice()
    lo.require_tool("pdfinfo")
    lo.require_tool("pdftoppm")
    work = tmp_path_factory.mktemp("filled")
    order = sorted(built, key=lambda p: p.stem != "slab_heating")      # the slowest first
    with ProcessPoolExecutor(max_workers=2) as pool:
        filled = [Path(f) for f in pool.map(_fill_one, map(str, order),
                                            [str(work / p.name) for p in order])]
    csv_dir = _convert_all(filled, lo.CSV_ALL_SHEETS, work / "csv")
    pdf_dir = _convert_all(filled, "pdf", work / "pdf")
    out = {}
    for p in filled:
        sheets = {}
        for s in SHEETS:
            f = csv_dir / f"{p.stem}-{s}.csv"
            assert f.is_file(), f"LibreOffice wrote no CSV for {p.name} sheet {s}"
            with open(f, encoding="utf-8-sig", newline="") as fh:
                sheets[s] = list(csv.reader(fh))
        pdf = pdf_dir / f"{p.stem}.pdf"
        assert pdf.is_file() and pdf.read_bytes()[:5] == b"%PDF-", f"no PDF for {p.name}"
        out[p.stem] = {"csv": sheets, "pdf": pdf, "src": next(b for b in built if b.stem == p.stem)}
    return out


def _cell(rows, cell: str) -> str:
    r, c = _rc(cell)
    row = rows[r - 1] if r - 1 < len(rows) else []
    return row[c - 1] if c - 1 < len(row) else ""


def _column(rows, col: str, first: int, last: int) -> np.ndarray:
    return np.array([float(_cell(rows, f"{col}{r}")) for r in range(first, last + 1)])


def test_libreoffice_shows_no_errors(shown):
    for name, d in shown.items():
        for sheet, rows in d["csv"].items():
            for i, row in enumerate(rows):
                for j, v in enumerate(row):
                    assert not any(m in v for m in ERROR_MARKS), f"{name} {sheet} row {i + 1} col {j + 1}: {v}"
        assert "licensed review" in _cell(d["csv"]["Calculation"], "A3")


def _slab_dehoog(p: dict, t: float) -> float:
    L, a, dT = (mpmath.mpf(p[k]) for k in ("thick", "alpha", "dtemp"))
    return float(mpmath.invertlaplace(lambda s: dT / (s * mpmath.cosh(L * mpmath.sqrt(s / a))), t,
                                      method="dehoog"))


def _slab_series(p: dict, t: np.ndarray) -> np.ndarray:
    """Far face of a slab with the near face stepped and the far face insulated (separation of variables)."""
    n = np.arange(400)[:, None]
    lam = (2 * n + 1) * np.pi / (2 * p["thick"])
    terms = (-1.0) ** n * 4 / ((2 * n + 1) * np.pi) * np.exp(-lam ** 2 * p["alpha"] * t[None, :])
    return p["dtemp"] * (1 - terms.sum(axis=0))


def _semi(p: dict, t: np.ndarray) -> np.ndarray:
    t = np.asarray(t, float)
    with np.errstate(divide="ignore"):
        return np.where(t > 0, p["dtemp"] * special.erfc(p["thick"] / (2 * np.sqrt(p["alpha"] * t))), 0.0)


def _lti(num, den, taus, step: bool) -> np.ndarray:
    """Step or impulse response of num/den at times taus >= 0 by the state-space matrix
    exponential (scipy.signal.tf2ss, scipy.linalg.expm); num/den strictly proper."""
    A, B, C, _D = signal.tf2ss(num, den)
    out = []
    for tau in taus:
        E = expm(A * tau)
        x = np.linalg.solve(A, (E - np.eye(len(A))) @ B) if step else E @ B
        out.append((C @ x).item())
    return np.array(out)


def _outside_reference(name: str, p: dict, t: np.ndarray) -> dict:
    """Sampled y by libraries outside the project (scipy, mpmath)."""
    if name == "rlc_step_response":
        return {"B": _lti([p["V"]], [p["L"] * p["C"], p["R"] * p["C"], 1.0], t, step=True)}
    if name == "mount_release":
        m, c, k, x0, v0 = (p[q] for q in ("mass", "damp", "stiff", "xstart", "vstart"))
        x = _lti([m * x0, c * x0 + m * v0], [m, c, k], t, step=False)
        return {"B": x, "C": 1000 * x}
    if name == "dead_time_process":
        shifted = np.clip(t - p["theta"], 0, None)
        y = _lti([p["gain"] * p["du"]], [p["tau1"] * p["tau2"], p["tau1"] + p["tau2"], 1.0], shifted, step=True)
        return {"B": np.where(t >= p["theta"], y, 0.0)}
    if name == "slab_heating":
        slab = np.array([_slab_dehoog(p, x) if x > 0 else 0.0 for x in t])
        return {"B": slab, "C": _semi(p, t), "D": _semi(p, t)}
    raise KeyError(name)


def test_sampled_columns_match_engine_and_outside_references(shown, info):
    for name, d in shown.items():
        r = info[name]["response"]
        rows = d["csv"]["Response"]
        t = _column(rows, "A", r["first_row"], r["last_row"])
        assert np.allclose(np.diff(t), t[1] - t[0]) and t[0] == 0.0
        wb = _load(d["src"])
        outside = None
        for col, spec in r["y"].items():
            y = _column(rows, col, r["first_row"], r["last_row"])
            assert np.ptp(y) > 0, f"{name} column {col} is flat"
            params = _inputs(wb, spec.get("params"))
            outside = outside or _outside_reference(name, params, t)
            scale = max(np.max(np.abs(outside[col])), 1e-300)
            _close(y, outside[col], rtol=RTOL, atol=1e-9 * scale, what=f"{name} {col} vs outside reference")
            if "input" in spec:                 # the engine called directly, same expression and inputs
                expr = wb["Calculation"][spec["expr"]].value
                eng = sheetfuncs.sample(expr, t, input=spec["input"], params=params).y * spec.get("scale", 1.0)
                _close(y, eng, rtol=RTOL, atol=1e-12 * scale, what=f"{name} {col} vs sheetfuncs.sample")
        if name == "slab_heating":              # de Hoog agrees with the modal series too
            _close(outside["B"][1:], _slab_series(params, t[1:]), rtol=1e-8, atol=1e-9 * params["dtemp"],
                   what="de Hoog vs Fourier series")


def _second_order(p: dict) -> dict:
    """Textbook step figures of V/(LC s^2 + RC s + 1) (underdamped)."""
    wn = 1 / math.sqrt(p["L"] * p["C"])
    z = p["R"] / 2 * math.sqrt(p["C"] / p["L"])
    wd = wn * math.sqrt(1 - z * z)
    V = p["V"]

    def y(t):
        return V * (1 - np.exp(-z * wn * t) * (np.cos(wd * t) + z / math.sqrt(1 - z * z) * np.sin(wd * t)))
    os_ = math.exp(-math.pi * z / math.sqrt(1 - z * z))
    tp = math.pi / wd
    return {"final_value": V, "overshoot_percent": 100 * os_, "peak_time": tp, "peak_value": V * (1 + os_),
            "rise_time": _rise(y, V, tp), "settling_time": _settle(y, V, 40 / (z * wn))}


def _two_lag(p: dict) -> dict:
    """Textbook step figures of K exp(-theta s)/((tau1 s + 1)(tau2 s + 1))."""
    K, t1, t2, th = p["gain"] * p["du"], p["tau1"], p["tau2"], p["theta"]

    def y(t):
        s = np.clip(t - th, 0, None)
        return K * (1 - (t1 * np.exp(-s / t1) - t2 * np.exp(-s / t2)) / (t1 - t2))
    return {"final_value": K, "dc_gain": K, "overshoot_percent": 0.0,
            "rise_time": _rise(y, K, th + 20 * max(t1, t2)), "settling_time": _settle(y, K, th + 40 * max(t1, t2))}


def _rise(y, final, hi):
    cross = [brentq(lambda t, q=q: y(t) - q * final, 0, hi, xtol=1e-15, rtol=1e-15) for q in (0.1, 0.9)]
    return cross[1] - cross[0]


def _settle(y, final, hi, band=0.02):
    """Last time |y - final| crosses band * final (found on a dense grid, refined by brentq)."""
    grid = np.linspace(0, hi, 400_001)
    k = np.nonzero(np.abs(y(grid) - final) > band * abs(final))[0][-1]
    return brentq(lambda t: abs(y(t) - final) - band * abs(final), grid[k], grid[k + 1], xtol=1e-15, rtol=1e-15)


def test_key_figures_match_figures_and_textbook_values(shown, info):
    checked = 0
    for name, d in shown.items():
        wb = _load(d["src"])
        rows = d["csv"]["Calculation"]
        for f in info[name]["figures"]:
            text = _cell(rows, f["cell"])
            value = float(text)
            what = f"{name} {f['cell']} {f['label']}"
            if "attr" in f:
                params = _inputs(wb, f.get("params"))
                expr = wb["Calculation"][f["expr"]].value
                fig = sheetfuncs.figures(expr, params, input=f["input"])
                ref = getattr(fig.poles[f["pole"]], f["attr"]) if "pole" in f else getattr(fig, f["attr"])
                _close(value, ref, rtol=RTOL, atol=1e-12, what=what + " vs sheetfuncs.figures")
            checked += 1
        p = _inputs(wb, info[name]["response"]["y"]["B"].get("params"))
        textbook = {}
        if name == "rlc_step_response":
            textbook = _second_order(p)
        elif name == "dead_time_process":
            textbook = _two_lag(p)
        elif name == "mount_release":
            m, c, k = p["mass"], p["damp"], p["stiff"]
            textbook = {"damping_ratio": c / (2 * math.sqrt(k * m)), "natural_frequency": math.sqrt(k / m),
                        "dc_gain": 1 / k, "initial_value": p["xstart"]}
        for f in info[name]["figures"]:
            value = float(_cell(rows, f["cell"]))
            what = f"{name} {f['cell']} {f['label']}"
            if f.get("attr") in textbook:
                _close(value, textbook[f["attr"]], rtol=1e-8, atol=1e-12, what=what + " vs textbook")
                checked += 1
            elif f.get("kind") == "slab":
                _close(value, _slab_dehoog(p, f["time_factor"] * p["thick"] ** 2 / p["alpha"]),
                       rtol=RTOL, what=what + " vs de Hoog")
            elif f.get("kind") == "semi":
                _close(value, _semi(p, f["time_factor"] * p["thick"] ** 2 / p["alpha"]), rtol=RTOL, what=what)
            elif f.get("kind") == "slab_level":      # de Hoog puts the far face on that level then
                _close(_slab_dehoog(p, value) / p["dtemp"], f["level"], rtol=1e-7, what=what + " vs de Hoog")
            elif f.get("kind") == "mode":
                _close(value, 4 * p["thick"] ** 2 / (math.pi ** 2 * p["alpha"]), rtol=1e-12, what=what)
    assert checked >= 30


def _page_text(pdf, page: int) -> str:
    exe = shutil.which("pdftotext") or "pdftotext"
    res = subprocess.run([exe, "-layout", "-f", str(page), "-l", str(page), str(pdf), "-"],
                         capture_output=True, text=True, timeout=60)
    assert res.returncode == 0, res.stderr
    return res.stdout


def test_pdf_pages_read_well(shown):
    """Every page of every filled template, exported to PDF by LibreOffice and rendered to PNG:
    not blank; the Calculation sheet on a few landscape pages, the chart on one page with a
    drawn curve, the 201-row Response table over several pages with its header on each."""
    for name, d in shown.items():
        pdf = d["pdf"]
        pages = lo.pdf_page_count(pdf)
        out = pdf.parent / "png"
        sheet_of = {}
        for k in range(1, pages + 1):
            text = _page_text(pdf, k)
            sheet = next((s for s in SHEETS if f"sheet {s}" in text), None)
            assert sheet, f"{name} page {k}: no sheet name in its footer"
            sheet_of[k] = sheet
            png = lo.pdf_page_png(pdf, k, out)
            assert not lo.png_is_blank(png), f"{name} page {k} ({sheet}) is blank"
            if sheet == "Chart":
                ink = lo.png_ink(png)
                assert ink["color_rows"] >= 20, f"{name}: chart page {ink}"
            if sheet == "Response":
                assert "t [s]" in text, f"{name} page {k}: the Response header is not repeated"
                rows = [ln for ln in text.splitlines() if re.match(r"\s*-?\d", ln)]
                assert 10 <= len(rows) <= 70, f"{name} page {k}: {len(rows)} table rows on one page"
        count = {s: list(sheet_of.values()).count(s) for s in SHEETS}
        assert 1 <= count["Calculation"] <= 3 and count["Chart"] == 1, (name, count)
        assert count["Response"] >= 3, f"{name}: 201 rows squeezed onto {count['Response']} page(s)"
        assert list(sheet_of.values()) == sorted(sheet_of.values(), key=SHEETS.index)
    rlc = shown["rlc_step_response"]["pdf"]
    first = _page_text(rlc, 1)
    assert re.search(r"overshoot\s+3\d\.\d\d\s*%", first), "overshoot not shown as a fixed-point percentage"
