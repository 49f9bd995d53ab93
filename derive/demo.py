"""The bundled demo: a probe at the centre of a charged dust shell (derive/examples/charged_shell.toml).

It runs as far along the pipeline as derive reaches and prints a plain-language summary.
"""

from __future__ import annotations

import os
from importlib import resources


def demo_spec_path() -> str:
    """Path of the bundled demo spec."""
    return str(resources.files("derive.examples").joinpath("charged_shell.toml"))


def run_demo(out: str | None = None) -> int:
    from derive import load
    from derive.report.summary import geometry_summary, spec_summary

    path = demo_spec_path()
    spacetime = load(path)
    print("derive demo: a probe at the centre of a charged dust shell\n")
    print(spec_summary(spacetime))
    print()
    print(geometry_summary(spacetime, list(spacetime.regions)))
    if out:
        from derive.report.derivation import Derivation
        from derive.report.json_output import write_atomic
        from derive.report.latex import geometry_sections

        derivation = Derivation(spacetime.title)
        geometry_sections(derivation, spacetime)
        write_atomic(os.path.join(out, "derivation.tex"), derivation.to_latex())
        print(f"\nwrote {os.path.join(out, 'derivation.tex')}")
    return 0
