"""Smoke test of the speed benchmark (no timing assertions)."""
import json
import os
import subprocess
import sys
from pathlib import Path

import sympy as sp

import sheetfuncs
from sheetfuncs._types import S
from sheetfuncs.benchmarks.engine import DEFAULT_CORPUS, read_corpus

ROOT = Path(__file__).resolve().parent.parent


def _run(*args, env_cache=None):
    env = dict(os.environ)
    env.pop("SHEETFUNCS_CACHE", None)
    if env_cache is not None:
        env["SHEETFUNCS_CACHE"] = env_cache
    return subprocess.run([sys.executable, "-m", "sheetfuncs.benchmarks.engine", *args], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=300)


def test_quick_run_prints_ratios_and_agrees_with_sympy(tmp_path):
    out = tmp_path / "bench.json"
    proc = _run("--quick", "--json", str(out))
    assert proc.returncode == 0, proc.stderr
    assert "set it to 'off'" in proc.stdout          # cache was on in the environment
    assert "median ratio (reference/engine):" in proc.stdout
    data = json.loads(out.read_text())
    labels = [c.label for c in read_corpus()[:2]]
    assert [r["label"] for r in data["cases"]] == labels
    for row in data["cases"]:
        assert row["label"] in proc.stdout
        assert row["status"] == "ok" and row["ratio"] > 0
        # engine f(t) against sympy.inverse_laplace_transform's f(t), independently computed
        assert row["agreement_source"] == "sympy"
        assert row["agreement"] <= 1e-9
    assert data["summary"]["median_ratio"] > 0


def test_no_note_when_cache_already_off():
    proc = _run("--quick", "--limit", "20", env_cache="off")
    assert proc.returncode == 0, proc.stderr
    assert "set it to 'off'" not in proc.stdout


def test_bad_corpus_line_is_a_short_error(tmp_path):
    bad = tmp_path / "corpus.txt"
    bad.write_text("only a label\n")
    proc = _run("--corpus", str(bad))
    assert proc.returncode == 2
    assert "line 1" in proc.stderr and "Traceback" not in proc.stderr


def test_corpus_covers_the_brief():
    cases = read_corpus(DEFAULT_CORPUS)
    assert len(cases) >= 30
    orders, delays = set(), 0
    for case in cases:
        F = sheetfuncs.parse(case.text)
        shifts = {e: sp.Dummy() for e in F.atoms(sp.exp)}
        _, den = sp.fraction(sp.together(F.xreplace(shifts)))
        orders.add(sp.degree(den, S))
        delays += F.has(sp.exp)
    assert {1, 2, 3, 4, 5, 6, 7, 8} <= orders
    assert delays >= 1


def test_sampling_benchmark_runs(capsys):
    from sheetfuncs.benchmarks import sampling as samplebench
    assert samplebench.main([]) == 0
    out = capsys.readouterr().out
    assert "engine ms" in out and len(out.strip().splitlines()) == 1 + len(samplebench.CASES)
