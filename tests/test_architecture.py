"""DESIGN.md: derive/solve and derive/detector never import sympy; only kernels cross to the numeric side."""

import os
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def test_numeric_stages_import_without_sympy():
    code = ("import sys; sys.modules['sympy'] = None\n"
            "import derive.solve.centre, derive.solve.horizon, derive.solve.propagation, derive.solve.api\n"
            "import derive.detector.study, derive.detector.response, derive.detector.switching\n"
            "print('ok')")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT,
                          env={**os.environ, "PYTHONPATH": ROOT})
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "ok"
