"""derive: from a spacetime written once in a spec file to what an Unruh-DeWitt detector registers there.

The public API::

    import derive
    st = derive.load("worked/schwarzschild/spec.toml", overrides={"M": 2.0})
    geo = st.geometry["outside"]
    geo.kretschmann, geo.christoffel, geo.einstein, geo.energy_conditions
"""

__version__ = "0.1.0"

from derive.errors import AccuracyError, DeriveError, InputError  # noqa: E402


def load(path, overrides=None):
    """Read a spec file (format 1) and return its :class:`~derive.spec.model.Spacetime`.

    Parameters
    ----------
    path : path-like
        The TOML spec file.
    overrides : mapping of str to float, optional
        Parameter values replacing the file's (what ``--set NAME=VALUE`` does on the command line).
    """
    from derive.spec.loader import load as _load

    return _load(path, overrides)


__all__ = ["load", "DeriveError", "InputError", "AccuracyError", "__version__"]
