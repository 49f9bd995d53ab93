"""`derive run` and `derive demo` as a user runs them."""

import json
import os

import numpy as np
import pytest

import derive
from derive.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


@pytest.mark.slow
def test_run_writes_everything(tmp_path, capsys):
    out = tmp_path / "result"
    assert main(["run", os.path.join(ROOT, "worked", "charged_shell", "spec.toml"), "--out", str(out),
                 "--quiet"]) == 0
    names = set(os.listdir(out))
    assert {"derivation.tex", "kernels", "summary.json", "provenance.json", "spectrum.csv", "spectrum.png",
            "spectrum.pdf", "response.csv", "response.png", "response.pdf"} <= names
    summary = json.loads((out / "summary.json").read_text())
    assert summary["spectrum"]["ok"] and summary["spectrum"]["largest_relative_error"] < 1e-10
    response = summary["response"]
    assert len(response["response"]) == len(response["error"]) == len(response["gaps"])
    assert all(e < 1e-9 * f for e, f in zip(response["error"], response["response"]))
    provenance = json.loads((out / "provenance.json").read_text())
    assert provenance["versions"]["sympy"] and provenance["spec_hash"] == derive.load(
        os.path.join(ROOT, "worked", "charged_shell", "spec.toml")).source_hash
    assert (out / "kernels" / "verification.json").is_file()
    # the derivation ends with the results: the response table with each value and its error, and the figures
    tex = (out / "derivation.tex").read_text()
    body = (out / "derivation-body.tex").read_text()
    assert r"\section{Results}" in tex and r"\section{Results}" in body
    from derive.report.results_tex import with_error
    for value, error in zip(response["response"], response["error"]):
        assert with_error(value, error) in tex
    assert r"\includegraphics{response.pdf}" in tex   # at its natural size: one journal column


def test_a_failing_run_leaves_the_earlier_folder(tmp_path, monkeypatch):
    import derive.run as run_module

    from derive.outputs import write_marker

    out = tmp_path / "result"
    out.mkdir()
    write_marker(str(out), "run")   # an earlier run of derive's
    (out / "earlier.txt").write_text("keep")

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt
    monkeypatch.setattr(run_module, "_numerics", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run_module.run(derive.load(os.path.join(ROOT, "worked", "static_shell", "spec.toml")), str(out),
                       progress=lambda message: None)
    assert (out / "earlier.txt").read_text() == "keep"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result"]


@pytest.mark.slow
def test_run_on_a_black_hole_writes_greybody_factors_and_the_three_states(tmp_path, capsys):
    # The worked example with a longer switching and two gaps (fewer frequencies, fewer l): same code path.
    text = open(os.path.join(ROOT, "worked", "schwarzschild", "spec.toml")).read()
    text = text.replace('width = "10"', 'width = "40"').replace("gaps = [-0.5, -0.25, 0.0, 0.25, 0.5]",
                                                             "gaps = [-0.1, 0.1]")
    assert 'width = "40"' in text and "gaps = [-0.1, 0.1]" in text
    spec = tmp_path / "spec.toml"
    spec.write_text(text)
    out = tmp_path / "bh"
    assert main(["run", str(spec), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["spectrum"]["kind"] == "transmission" and summary["spectrum"]["by_l"]["0"]["ok"]
    assert "response" not in summary["skipped"]
    states = summary["response"]["states"]
    assert set(states) == {"boulware", "hartle-hawking", "unruh"}
    # a thermal bath excites the detector more than the Boulware state; Unruh (only outgoing flux) lies between
    for i in range(2):
        assert (states["boulware"]["response"][i] < states["unruh"]["response"][i]
                < states["hartle-hawking"]["response"][i])
    assert summary["response"]["local_temperature"] == pytest.approx(1 / (8 * np.pi * np.sqrt(2 / 3)), rel=1e-12)
    header = (out / "response.csv").read_text().splitlines()[0]
    assert "response_unruh" in header
    assert (out / "spectrum.csv").is_file() and (out / "response.png").is_file()



@pytest.mark.slow
def test_a_refused_response_is_written_around_and_exits_2(tmp_path, capsys):
    # a massive field outside a black hole: the response is refused (its quasi-bound resonances are not summed);
    # run writes everything else, says so in summary.json, and exits 2 as derive response does (it exited 0)
    text = open(os.path.join(ROOT, "worked", "schwarzschild", "spec.toml")).read().replace('mass = "0"',
                                                                                           'mass = "0.4"')
    spec = tmp_path / "massive.toml"
    spec.write_text(text)
    out = tmp_path / "result"
    assert main(["run", str(spec), "--out", str(out), "--quiet"]) == 2
    message = capsys.readouterr().err
    assert str(out) in message and "refused: response:" in message and "quasi-bound" in message
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "refused" and "quasi-bound" in summary["refused"]["response"]
    assert {"derivation.tex", "spectrum.csv", "summary.json", "provenance.json"} <= set(os.listdir(out))
    assert "response.csv" not in os.listdir(out)

@pytest.mark.slow
def test_demo_end_to_end(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path / "demo")]) == 0
    text = capsys.readouterr().out
    assert "In plain words" in text and "runs" in text
    assert (tmp_path / "demo" / "response.csv").is_file()
    rows = (tmp_path / "demo" / "comparisons.csv").read_text().splitlines()
    assert rows[0].startswith("switching_width,local,gap,F,F_error") and len(rows) == 1 + 2 * 7
