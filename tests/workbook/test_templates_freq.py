"""The two frequency-half templates: deterministic build equal to the committed files, only known
SF_ functions, a logarithmic frequency axis; filled by sheetfuncs.fill and opened in the real
LibreOffice, where the figures must match the engine called directly and the unity-gain two-pole
filter formulas f0 = 1/(2 pi sqrt(R1 R2 C1 C2)), Q = sqrt(R1 R2 C1 C2)/(C2 (R1 + R2)) (common practice)."""
from __future__ import annotations

import math
from pathlib import Path

import openpyxl
import pytest

from sheetfuncs import cellfuncs, templates_freq
from sheetfuncs.engine import frequency, loops
from sheetfuncs.fill import fill_workbook
from tests import lo

ERROR_MARKS = ("#NAME?", "#VALUE!", "Err:", "#SF!", "#REF!", "#DIV/0!", "#N/A", "#NUM!")


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    return templates_freq.build_all(tmp_path_factory.mktemp("tfreq"))


def test_committed_files_are_the_generator_output(built):
    folder = Path(__file__).resolve().parents[2] / "workbooks"
    for p in built:
        assert (folder / p.name).read_bytes() == p.read_bytes(), \
            f"workbooks/{p.name} is stale: run python -m sheetfuncs.templates_freq"
    assert (folder / "README_frequency.md").read_text(encoding="utf-8") == \
        templates_freq.readme(templates_freq.describe())


def test_only_known_functions_and_a_log_axis(built):
    for p in built:
        wb = openpyxl.load_workbook(p)
        for ws in wb.worksheets:
            for row in ws.iter_rows():
                for c in row:
                    if isinstance(c.value, str) and c.value.startswith("="):
                        for part in c.value.split("SF_")[1:]:
                            assert f"SF_{part.split('(')[0]}" in cellfuncs.FUNCTIONS, (p.name, c.coordinate)
        chart = wb["Chart"]._charts[0]
        assert chart.x_axis.scaling.logBase == 10


def _grid(rows):
    return {(r, c): v for r, row in enumerate(rows) for c, v in enumerate(row)}


def _find(rows, label):
    for row in rows:
        if row and row[0] == label:
            return row
    raise AssertionError(f"no row '{label}'")


def test_filled_in_libreoffice(built, tmp_path):
    outs = []
    for p in built:
        out = tmp_path / p.name.replace(".xlsx", "_out.xlsx")
        rep = fill_workbook(p, out, use_cache=False)
        assert rep.errors == 0, rep.error_cells
        outs.append(out)
    lo.require_soffice()
    f_sheets = lo.to_csv_all_sheets(outs[0], tmp_path / "f")
    l_sheets = lo.to_csv_all_sheets(outs[1], tmp_path / "l")
    for sheets in (f_sheets, l_sheets):
        for name, rows in sheets.items():
            for row in rows:
                for v in row:
                    assert not any(str(v).startswith(m) for m in ERROR_MARKS), (name, v)
    calc = f_sheets["Calculation"]
    R1, R2, C1, C2 = 1e4, 1e4, 22e-9, 10e-9
    f0 = 1 / (2 * math.pi * math.sqrt(R1 * R2 * C1 * C2))
    q = math.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))
    assert float(_find(calc, "corner (natural) frequency f0")[1]) == pytest.approx(f0, rel=1e-3)   # shown 0.0
    assert float(_find(calc, "quality factor Q")[1]) == pytest.approx(q, abs=6e-4)                 # shown 0.000
    H = f"1/({R1 * R2 * C1 * C2!r} s^2 + {C2 * (R1 + R2)!r} s + 1)"
    figs = frequency.frequency_figures(frequency.model(H))
    assert float(_find(calc, "-3 dB bandwidth")[1]) == pytest.approx(figs.bandwidth / (2 * math.pi), abs=0.06)
    freq = f_sheets["Frequency"]
    first = [r for r in freq if r and r[0] and r[0][0].isdigit()]
    assert len(first) == 121
    f, db = float(first[60][0].replace(",", "")), float(first[60][1])
    assert db == pytest.approx(cellfuncs.gain_db(H, f, None, "Hz"), abs=6e-4)
    # loop book: figures against the engine called directly on the same loop
    lc = l_sheets["Calculation"]
    a = loops.close_loop("1.6 exp(-6 s)/(40 s + 1)", "1.2 (1 + 1/(40 s))", "1/(2 s + 1)")
    m = loops.margins(a.loop)
    assert float(_find(lc, "phase margin")[1]) == pytest.approx(m.phase_margin_deg, abs=0.06)
    assert float(_find(lc, "gain margin")[1]) == pytest.approx(m.gain_margin_db, abs=6e-3)
    assert float(_find(lc, "closed loop stable (1 yes, 0 no)")[1]) == 1
    assert any("cancels a plant pole" in str(v) for row in lc for v in row)
    # closed-loop step with the dead time, against the engine on the same closed loop
    # (the engine's dead-time series is itself checked against solve_ivp in tests/reference)
    import sheetfuncs as sf
    step = sf.figures(a.closed)
    assert step.stable is True
    assert float(_find(lc, "closed-loop overshoot")[1]) == pytest.approx(step.overshoot_percent, abs=6e-3)
    assert float(_find(lc, "closed-loop settling time (2% band)")[1]) == pytest.approx(step.settling_time,
                                                                                      abs=0.06)
    assert float(_find(lc, "closed-loop final value")[1]) == pytest.approx(1.0, abs=1e-4)
