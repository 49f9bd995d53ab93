"""`derive scan`: resumable after kill -9, every point exactly once; local processes and dask."""

import csv
import json
import os
import signal
import subprocess
import sys
import time

import pytest

from conftest import two_region_spec

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SPEC = two_region_spec("1", "1 - 2*M/r", "M = { value = 0.1, positive = true }\n"
                       "R = { value = 1.0, positive = true }").split("[field]")[0]


def rows(out):
    with open(os.path.join(out, "scan.csv")) as handle:
        return list(csv.DictReader(handle))


def run(args, **kwargs):
    return subprocess.run([sys.executable, "-m", "derive.cli"] + args, capture_output=True, text=True,
                          cwd=ROOT, env={**os.environ, "PYTHONPATH": ROOT}, **kwargs)


@pytest.mark.slow
def test_scan_resumes_after_kill_9(tmp_path):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    out = tmp_path / "scan"
    args = ["scan", str(spec), "--vary", "M=0.01:0.4:12", "--vary", "R=1,2", "--out", str(out), "--workers", "1"]
    proc = subprocess.Popen([sys.executable, "-m", "derive.cli"] + args, cwd=ROOT, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, env={**os.environ, "PYTHONPATH": ROOT})
    points = out / "points"
    deadline = time.time() + 120
    while time.time() < deadline and (not points.is_dir() or len(os.listdir(points)) < 5):
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    done_before = {name: json.loads((points / name).read_text())["run"] for name in os.listdir(points)
                   if name.endswith(".json")}
    assert 5 <= len(done_before) < 24
    result = run(args)
    assert result.returncode == 0, result.stderr
    assert f"{24 - len(done_before)} computed now, {len(done_before)} already done" in result.stdout
    table = rows(out)
    assert sorted(int(r["index"]) for r in table) == list(range(24))        # every point exactly once
    for name, first_run in done_before.items():                               # and none recomputed
        assert json.loads((points / name).read_text())["run"] == first_run
    # the shell's surface density at each point is the published closed form (Israel 1966; Poisson 2004)
    import math
    for r in table:
        M, R = float(r["M"]), float(r["R"])
        assert float(r["shell0_sigma"]) == pytest.approx((1 - math.sqrt(1 - 2 * M / R)) / (4 * math.pi * R),
                                                         rel=1e-13)


@pytest.mark.slow
def test_a_different_scan_in_the_same_folder_is_refused(tmp_path):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    out = tmp_path / "scan"
    assert run(["scan", str(spec), "--vary", "M=0.1,0.2", "--out", str(out), "--workers", "1"]).returncode == 0
    refused = run(["scan", str(spec), "--vary", "M=0.1,0.3", "--out", str(out)])
    assert refused.returncode == 2 and "different scan" in refused.stderr


@pytest.mark.slow
def test_scan_on_a_dask_local_cluster(tmp_path):
    distributed = pytest.importorskip("dask.distributed")
    from derive import load
    from derive.scan import parse_vary, run_scan

    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    st = load(str(spec))
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        result = run_scan(st, parse_vary(["M=0.05:0.2:4"], list(st.parameters)), str(tmp_path / "scan"),
                          executor="dask", scheduler=cluster.scheduler_address, progress=False)
    assert result["computed"] == 4
    assert [int(r["index"]) for r in rows(tmp_path / "scan")] == [0, 1, 2, 3]
    assert all(r["status"] == "ok" for r in rows(tmp_path / "scan"))


def test_a_scan_with_points_that_are_not_ok_says_so_in_its_exit_code(tmp_path, capsys):
    # every point is written, and the exit code is no longer 0 when some are not numbers derive stands behind:
    # 2 for a point that is bad input (M < 0 against the spec's positive M), naming it (it exited 0)
    from derive.cli import main

    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    out = tmp_path / "scan"
    assert main(["scan", str(spec), "--vary", "M=0.1,-0.1", "--out", str(out), "--workers", "1"]) == 2
    assert "1 error (point 1:" in capsys.readouterr().err
    table = rows(out)
    assert [r["status"] for r in table][0] == "ok" and table[1]["status"].startswith("error")
