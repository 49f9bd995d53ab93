"""The command line as a user runs it: exit codes, JSON keys, files written."""

import json
import os
import shutil
import subprocess
import sys

import pytest
import sympy as sp

from derive.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SCHWARZSCHILD = os.path.join(ROOT, "worked", "schwarzschild", "spec.toml")


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_check_summarises(capsys):
    code, out, _ = run(capsys, "check", SCHWARZSCHILD)
    assert code == 0
    assert "valid spec" in out and "outside" in out


def test_geometry_json_contract(capsys):
    # README.md / issue contract: {"regions": {NAME: {"coordinates", "metric", "ricci_scalar", "kretschmann",
    # "ricci_squared", "einstein", "stress_energy", "energy_conditions"}}}, expressions sympy reads back.
    code, out, _ = run(capsys, "geometry", SCHWARZSCHILD, "--json", "--set", "M=2")
    assert code == 0
    data = json.loads(out)
    region = data["regions"]["outside"]
    for key in ("coordinates", "metric", "ricci_scalar", "kretschmann", "ricci_squared", "einstein",
                "stress_energy", "energy_conditions"):
        assert key in region
    M, r = sp.symbols("M r")
    assert sp.simplify(sp.sympify(region["kretschmann"]) - 48 * M ** 2 / r ** 6) == 0
    assert region["energy_conditions"]["null"]["verdict"] == "holds"
    assert len(region["einstein"]) == 4 and len(region["metric"][0]) == 4


def test_bad_spec_exits_2_naming_file_and_key(capsys, write_spec):
    path = write_spec('format = 1\n[coordinates]\nnames = ["t", "x"]\n[[region]]\n'
                      'line_element = "-dt**2 + __import__(\'os\').system(\'touch pwned\')*dx**2"\n')
    code, _, err = run(capsys, "geometry", path)
    assert code == 2
    assert path in err and "region[0].line_element" in err
    assert not os.path.exists("pwned")


def test_bad_set_and_missing_file(capsys, tmp_path):
    code, _, err = run(capsys, "check", SCHWARZSCHILD, "--set", "M=heavy")
    assert code == 2 and "not a number" in err
    code, _, err = run(capsys, "check", str(tmp_path / "nope.toml"))
    assert code == 2 and "cannot read" in err


def test_unknown_region(capsys):
    code, _, err = run(capsys, "geometry", SCHWARZSCHILD, "--region", "outsde")
    assert code == 2 and "did you mean 'outside'" in err


def test_geometry_writes_latex(capsys, tmp_path):
    target = tmp_path / "sub" / "derivation.tex"
    code, _, _ = run(capsys, "geometry", SCHWARZSCHILD, "--latex", str(target))
    assert code == 0
    text = target.read_text()
    assert r"\begin{document}" in text and r"\label{eq:outside-Kretschmann}" in text


@pytest.mark.latex
@pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex not installed (CI installs it)")
def test_latex_compiles_with_pdflatex(capsys, tmp_path):
    from derive.report.latex import compile_pdf

    target = tmp_path / "derivation.tex"
    assert run(capsys, "geometry", SCHWARZSCHILD, "--latex", str(target))[0] == 0
    ok, log, pdf = compile_pdf(target.read_text())
    assert ok, log
    assert pdf.startswith(b"%PDF")


def test_console_script_entry_point_runs():
    proc = subprocess.run([sys.executable, "-m", "derive.cli", "check", SCHWARZSCHILD], capture_output=True,
                          text=True, cwd=ROOT, env={**os.environ, "PYTHONPATH": ROOT})
    assert proc.returncode == 0, proc.stderr


@pytest.mark.latex
@pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex not installed (CI installs it)")
@pytest.mark.parametrize("example", ["static_shell"])     # the de Sitter bubble: in test_display's overfull test
def test_full_derivation_with_shells_and_field_compiles(capsys, tmp_path, example):
    from derive.report.latex import compile_pdf

    target = tmp_path / "derivation.tex"
    spec = os.path.join(ROOT, "worked", example, "spec.toml")
    assert run(capsys, "field", spec, "--latex", str(target))[0] == 0
    text = target.read_text()
    assert "Second junction condition" in text and "Modes across" in text
    ok, log, pdf = compile_pdf(text)
    assert ok, log


def test_a_value_not_reached_is_printed_as_such():
    # a response value the computation could not reach is null in JSON; the terminal table says so (it had ended
    # in an internal error formatting None)
    from derive.report.summary import response_summary

    data = {"switching": {"shape": "gaussian", "width": 1.0, "duration": 10.0, "tail": 1e-12}, "at": 0.0,
            "state": "vacuum", "gaps": [0.0, 1.0], "response": [0.09, None], "error": [1e-12, None],
            "locality": {"duration": 10.0, "round_trip": float("inf"), "local": True}, "notes": []}
    text = response_summary("a test", data)
    assert "not reached" in text and "9.000000000000000e-02" in text
