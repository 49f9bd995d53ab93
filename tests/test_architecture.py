"""DEVELOPERS.md: derive/solve and derive/detector never import sympy; only kernels cross to the numeric side."""

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


def _imports(path):
    import ast

    with open(os.path.join(ROOT, path), encoding="utf-8") as handle:
        tree = ast.parse(handle.read())
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
        elif isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
    return names


def test_the_command_line_run_scan_and_demo_call_only_the_api():
    # the physics is decided below the command line, in derive/pipeline.py (common practice: a thin CLI)
    for path in ("derive/cli.py", "derive/run.py", "derive/scan.py", "derive/demo.py"):
        imports = _imports(path)
        assert "derive.cli" not in imports or path == "derive/cli.py", path
        reached = sorted(name for name in imports if name.startswith(("derive.solve", "derive.detector",
                                                                       "derive.codegen.problem")))
        assert reached == [], (path, reached)
