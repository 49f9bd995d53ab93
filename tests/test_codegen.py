"""Code generation: printers, kernel records, verification against 40-digit evaluation, export."""

import json
import linecache
import os
import subprocess
import sys
import traceback

import mpmath
import numpy as np
import pytest
import sympy as sp

import derive
from derive.cli import main
from derive.codegen.catalog import KernelSet
from derive.codegen.kernel import check_identifier, lower
from derive.codegen.printers import CodegenError, printer_for
from derive.errors import AccuracyError, InputError

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
WORKED = os.path.join(ROOT, "worked")
r, M, l, omega = sp.symbols("r M l omega", positive=True)


def test_printers_pin_their_output():
    # Exact strings (STYLE.md: printer tests pin the output). Integer powers are unrolled for numpy; mpmath
    # literals are exact rationals.
    expr = (1 - 2 * M / r) * r ** 3 + sp.sqrt(r) + sp.Rational(1, 3)
    assert printer_for("numpy").doprint(expr) == "_np.sqrt(r) + (r*r*r)*(-2*M/r + 1) + 1/3"
    assert printer_for("mpmath").doprint(sp.Rational(1, 3) * r) == "(_mp.mpf(1)/_mp.mpf(3))*r"


def test_undefined_function_is_refused_at_generation():
    f = sp.Function("f")(r)
    with pytest.raises(CodegenError, match="undefined function"):
        lower(f + r, [r], "bad")


@pytest.mark.parametrize("name", ["import", "_hidden", "a b", "x.y", "__class__", "1x", "λ"])
def test_identifiers_are_validated(name):
    with pytest.raises(CodegenError):
        check_identifier(name)


def test_kernel_record_and_generated_file():
    lowered = lower((r - 2 * M) * (l * (l + 1) * r + 2 * M) / r ** 4, [r, l, omega, M], "potential_test",
                    "potential", owner="outside", owner_kind="region")
    kernel = lowered.kernel
    assert kernel.arguments == ("r", "l", "omega", "M") and kernel.backend == "numpy" and kernel.shape == ()
    lines = kernel.source.splitlines()
    assert lines[0].startswith("# derive kernel potential_test (numpy backend)")
    assert "sha256 " + kernel.hash in lines[0]
    assert "QUANTITY = 'potential; region outside'" in lines
    imports = [line for line in lines if line.startswith(("import", "from"))]
    assert imports == ["import numpy as _np"]
    assert kernel.source.count("def ") == 1
    assert os.path.basename(kernel.path) == f"kernel_potential_test_{kernel.hash}.py"
    assert linecache.getline(kernel.path, 1).startswith("# derive kernel")
    # vectorised and broadcasting, including over an argument it does not use (omega)
    value = kernel(np.array([3.0, 4.0]), 1, np.array([[0.1], [0.2]]), 1.0)
    assert value.shape == (2, 2)
    # lowering again reuses the file named by the same hash
    again = lower((r - 2 * M) * (l * (l + 1) * r + 2 * M) / r ** 4, [r, l, omega, M], "potential_test",
                  "potential", owner="outside", owner_kind="region")
    assert again.kernel.path == kernel.path and again.kernel.hash == kernel.hash
    # the stages are all kept
    assert lowered.replacements is not None and len(lowered.reduced) == 1


def test_tracebacks_show_generated_lines():
    kernel = lower(1 / (r - 2), [r], "pole").kernel
    try:
        kernel("not a number")
    except TypeError:
        text = traceback.format_exc()
    assert kernel.path in text and "return" in text


def test_mpmath_twin_is_exact_at_high_precision():
    # Source: mpmath (reference library); the twin keeps rational literals exact, so at 50 digits it agrees
    # with sympy's own evalf of the expression to 45 digits.
    expr = sp.Rational(1, 3) * r ** 2 - sp.Rational(2, 7) * M / r + sp.pi * sp.sqrt(r)
    twin = lower(expr, [r, M], "twin_check", backend="mpmath").kernel
    with mpmath.workdps(50):
        value = twin(mpmath.mpf("1.25"), mpmath.mpf("0.75"))
        exact = sp.N(expr.subs({r: sp.Rational(5, 4), M: sp.Rational(3, 4)}), 50)
        assert abs(value - mpmath.mpf(str(exact))) < mpmath.mpf(10) ** -45


@pytest.mark.slow
def test_charged_shell_kernels_verify_to_1e_12():
    # Every kernel against its mpmath twin at 40 digits (itself checked against sympy evalf) at >= 200 points.
    st = derive.load(os.path.join(WORKED, "charged_shell", "spec.toml"))
    kernels = KernelSet(st)
    entries = kernels.verify_all()
    quantities = {e.kernel.quantity for e in entries}
    assert {"potential", "dtortoise_dr", "transfer_matrix"} <= quantities
    for entry in entries:
        v = entry.verification
        assert v.points >= 200 and v.twin_checked >= 1
        assert v.status == "verified" and v.max_relative_error <= 1e-12, (entry.name, v.reason)
    kernels.require_verified()


def test_horizon_cancellation_is_avoided():
    # f = 1 - m/r^2 near the horizon r = 1 loses 8 digits as (r^2 - m)/r^2 at r = 1 + 1e-8 (common practice:
    # cancellation of nearly equal terms); derive divides the horizon out before lowering: (r - r_h) g(r).
    from derive.codegen.kernel import lower
    from derive.codegen.verify import reference_values

    st = derive.load(os.path.join(WORKED, "tangherlini_5d", "spec.toml"))
    kernels = KernelSet(st)
    entry = kernels.get("metric_f", "outside")
    region = st.field_problem.regions["outside"]
    naive = lower(region.f, entry.arguments, "naive_f", "metric_f").kernel
    columns = kernels.points(entry)
    reference = reference_values(entry.twin.function, columns, ())
    assert KernelSet._measure(naive, columns, (), reference, entry.arguments)[0] > 1e-10   # really unstable
    v = kernels.verify(entry)
    assert v.status == "verified" and v.max_relative_error < 1e-14 and v.form == "as derived"


LUMP = """
format = 1
title = "Gaussian lump"
[parameters]
a = { value = 0.3, positive = true }
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[[region]]
name = "lump"
where = "r >= 0"
line_element = "-(1 - a*r**2*exp(-r**2))*dt**2 + dr**2/(1 - a*r**2*exp(-r**2)) + r**2*(dtheta**2 + sin(theta)**2*dphi**2)"
[field]
mass = "0"
coupling = "0"
"""


def test_growing_exponentials_are_written_to_stay_finite_far_out(write_spec):
    # f = h = 1 - a r^2 e^(-r^2): sympy's dr*/dr = e^(r^2)/(e^(r^2) - a r^2) overflowed past r ~ 27 (the kernel was
    # flagged and the solver refused it); derive writes it through e^(-r^2).  Reference: mpmath at 40 digits of
    # dr*/dr = 1/f and V = f (l(l+1)/r^2 + f'/r) for a minimally coupled massless field with f = h (common practice)
    st = derive.load(write_spec(LUMP))
    kernels = KernelSet(st)
    kernels.require_verified()
    a = 0.3
    mpmath.mp.dps = 40
    try:
        f = (lambda x: 1 - a * x ** 2 * mpmath.exp(-x ** 2))
        for r in (0.5, 3.0, 30.0, 1e3, 1e8):
            x = mpmath.mpf(r)
            dt = float(kernels.get("dtortoise_dr", "lump").kernel(np.array([r]), a)[0])
            assert abs(dt - float(1 / f(x))) <= 1e-15
            for l in (0, 3):
                V = float(kernels.get("potential", "lump").kernel(np.array([r]), l, 1.0, a)[0])
                exact = f(x) * (l * (l + 1) / x ** 2 + mpmath.diff(f, x) / x)
                assert abs(V - float(exact)) <= 1e-14 * abs(float(exact)) + 1e-300
    finally:
        mpmath.mp.dps = 15


@pytest.mark.slow
def test_flagged_kernels_are_refused_by_the_solver_gate():
    st = derive.load(os.path.join(WORKED, "charged_shell", "spec.toml"))
    kernels = KernelSet(st)
    kernels.verify_all(tolerance=1e-18)   # unreachable in double precision: everything is flagged
    assert all(e.verification.status == "flagged" and "condition number" in e.verification.reason
               for e in kernels.entries if e.verification.max_relative_error > 1e-18)
    with pytest.raises(AccuracyError):
        bad = kernels.entries[0]
        bad.verification.status = "flagged"
        kernels.require_verified()


def test_kernels_command_exports_an_importable_folder(tmp_path, capsys):
    out = tmp_path / "shell_kernels"
    spec = os.path.join(WORKED, "static_shell", "spec.toml")
    assert main(["kernels", spec, "--out", str(out), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    record = data["kernels"][0]
    for key in ("name", "quantity", "arguments", "file", "function", "max_relative_error", "points"):
        assert key in record
    assert "region" in record or "interface" in record
    assert {k["quantity"] for k in data["kernels"]} >= {"potential", "dtortoise_dr", "transfer_matrix"}
    assert (out / "verification.json").is_file() and (out / "README.md").is_file()
    # importable with numpy alone, in a fresh interpreter that cannot see derive or sympy
    code = ("import sys; sys.modules['sympy'] = None; sys.modules['derive'] = None; sys.path.insert(0, sys.argv[1]); "
            "import numpy as np, shell_kernels as k; "
            "print(float(k.potential_outside(np.array([2.0]), 1, 0.5, 0.25, 1.0)[0]))")
    proc = subprocess.run([sys.executable, "-c", code, str(tmp_path)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    value = float(proc.stdout)
    M_, r_ = 0.25, 2.0
    f = 1 - 2 * M_ / r_
    assert value == pytest.approx(f * (2 / r_ ** 2 + 2 * M_ / r_ ** 3), rel=1e-14)   # Regge-Wheeler, l = 1


def test_export_is_atomic(tmp_path, monkeypatch):
    from derive.codegen import export as export_module

    from derive.outputs import write_marker

    out = tmp_path / "kernels"
    out.mkdir()
    write_marker(str(out), "kernels")   # an earlier export of derive's
    (out / "earlier.txt").write_text("keep me")
    st = derive.load(os.path.join(WORKED, "schwarzschild", "spec.toml"))

    def broken(*args, **kwargs):
        raise RuntimeError("interrupted")
    monkeypatch.setattr(export_module, "_readme", broken)
    with pytest.raises(RuntimeError):
        export_module.export(KernelSet(st), str(out))
    assert (out / "earlier.txt").read_text() == "keep me"
    assert [p.name for p in tmp_path.iterdir()] == ["kernels"]


def test_kernels_need_parameter_values(write_spec):
    path = write_spec('format = 1\n[parameters]\nM = { positive = true }\n[coordinates]\nnames = ["t", "r"]\n'
                      '[[region]]\nline_element = "-(1 - 2*M/r)*dt**2 + dr**2/(1 - 2*M/r)"\n')
    with pytest.raises(InputError, match="no value"):
        KernelSet(derive.load(path))


def test_exponentials_of_several_multiples_are_tamed_together(write_spec):
    # f = 1 - a r^2/(e^(r^2) + 1): V holds e^(r^2), e^(2 r^2) and e^(3 r^2); all are written as integer powers of
    # e^(-r^2) whichever comes first (a first pick of e^(3 r^2) had left fractional powers that cancel could not
    # combine, and the tail at infinity came out nan in some orders of set iteration).  The tail is centrifugal (the
    # exponentials vanish to every order in 1/r) and the kernels stay finite far out; reference: mpmath at 30
    # digits of dr*/dr = 1/f (f = h)
    st = derive.load(write_spec(LUMP.replace("a*r**2*exp(-r**2)", "a*r**2/(exp(r**2) + 1)")))
    region = next(iter(st.field_problem.regions.values()))
    assert region.ends["upper"]["tail"] == "centrifugal"
    kernels = KernelSet(st)
    kernels.require_verified()
    mpmath.mp.dps = 30
    for r in (2.0, 40.0, 1e4):
        x = mpmath.mpf(r)
        exact = 1 / (1 - 0.3 * x ** 2 / (mpmath.exp(x ** 2) + 1))
        assert abs(float(kernels.get("dtortoise_dr", "lump").kernel(np.array([r]), 0.3)[0]) - float(exact)) <= 1e-15
        assert np.isfinite(kernels.get("potential", "lump").kernel(np.array([r]), 2, 1.0, 0.3)).all()
