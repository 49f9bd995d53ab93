"""Shared fixtures: an isolated disk cache for every test session and a spec-file writer."""

import os
import textwrap

import pytest


@pytest.fixture(autouse=True, scope="session")
def _isolated_cache(tmp_path_factory):
    if "DERIVE_CACHE_DIR" not in os.environ:
        os.environ["DERIVE_CACHE_DIR"] = str(tmp_path_factory.mktemp("derive-cache"))
    yield


@pytest.fixture
def write_spec(tmp_path):
    """write_spec(text, name="spec.toml") -> path of a spec file with that (dedented) text."""
    def write(text: str, name: str = "spec.toml") -> str:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text))
        return str(path)
    return write


SPHERE = "r**2*(dtheta**2 + sin(theta)**2*dphi**2)"


def static_spec(f: str, h: str | None = None, parameters: str = 'M = { value = 1.0, positive = true }',
                where: str = "", extra: str = "") -> str:
    """A one-region static spherical spec with -f dt^2 + dr^2/h + r^2 dOmega^2."""
    h = h or f
    where_line = f'where = "{where}"' if where else ""
    return f"""
format = 1
title = "test"
[parameters]
{parameters}
[coordinates]
names = ["t", "r", "theta", "phi"]
positive = ["r"]
[[region]]
name = "region"
{where_line}
line_element = "-({f})*dt**2 + dr**2/({h}) + {SPHERE}"
{extra}
"""
