"""Shared fixtures: an isolated disk cache for every test session, mpmath at its default precision in every test,
and a spec-file writer."""

import os
import textwrap

import pytest


@pytest.fixture(autouse=True, scope="session")
def _isolated_cache(tmp_path_factory):
    if "DERIVE_CACHE_DIR" not in os.environ:
        os.environ["DERIVE_CACHE_DIR"] = str(tmp_path_factory.mktemp("derive-cache"))
    yield


@pytest.fixture(autouse=True)
def _mpmath_precision():
    """Every test starts at mpmath's default precision and leaves it so: a test that raised mp.dps and did not
    restore it made every later test in the same worker run its mpmath at that precision (the sin4 kernel test
    took 58 s instead of 7 after the AdS tests' 25 digits)."""
    import mpmath

    mpmath.mp.dps = 15
    yield
    mpmath.mp.dps = 15


@pytest.fixture
def write_spec(tmp_path):
    """write_spec(text, name="spec.toml") -> path of a spec file with that (dedented) text."""
    def write(text: str, name: str = "spec.toml") -> str:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text))
        return str(path)
    return write


SPHERE = "r**2*(dtheta**2 + sin(theta)**2*dphi**2)"


def _header(title: str, parameters: str) -> str:
    """format, title, parameters and the spherical coordinates (t, r, theta, phi) shared by the templates."""
    return (f'\nformat = 1\ntitle = "{title}"\n[parameters]\n{parameters}\n[coordinates]\n'
            'names = ["t", "r", "theta", "phi"]\npositive = ["r"]')


def static_spec(f: str, h: str | None = None, parameters: str = 'M = { value = 1.0, positive = true }',
                where: str = "", extra: str = "") -> str:
    """A one-region static spherical spec with -f dt^2 + dr^2/h + r^2 dOmega^2."""
    h = h or f
    where_line = f'where = "{where}"' if where else ""
    return _header("test", parameters) + f"""
[[region]]
name = "region"
{where_line}
line_element = "-({f})*dt**2 + dr**2/({h}) + {SPHERE}"
{extra}
"""


def two_region_spec(inside_f, outside_f, parameters, inside_h=None, unknowns='["alpha"]', alpha=True):
    """An interior -alpha^2 f_in dt^2 + dr^2/h_in + ... (alpha fixed by the junction) glued at r = R to -f_out dt^2 + ..."""
    inside_h = inside_h or inside_f
    scale = "alpha**2*" if alpha else ""
    return _header("shell", parameters) + f"""
[[region]]
name = "inside"
where = "0 <= r < R"
line_element = "-{scale}({inside_f})*dt**2 + dr**2/({inside_h}) + {SPHERE}"
unknowns = {unknowns}
[[region]]
name = "outside"
where = "r > R"
line_element = "-({outside_f})*dt**2 + dr**2/({outside_f}) + {SPHERE}"
[[interface]]
between = ["inside", "outside"]
at = "r = R"
[field]
mass = "0"
coupling = "0"
"""
