"""derive: from a spacetime written once in a spec file to what an Unruh-DeWitt detector registers there.

The public API::

    import derive
    st = derive.load("worked/static_shell/spec.toml", M=0.2)
    geo = st.geometry["outside"]
    geo.kretschmann, geo.christoffel, geo.einstein, geo.energy_conditions
    s = st.spectrum("0.5:10:20")          # the spectral density at the centre, with errors
    f = st.response()                     # the detector's response, comparison, locality, runs
    f.response, f.error, f.to_dataframe(), f.plot()
"""

__version__ = "0.1.0"

from derive.errors import AccuracyError, DeriveError, InputError, NotSupported  # noqa: E402


def load(path, overrides=None, **values):
    """Read a spec file (format 1) and return its :class:`~derive.spec.model.Spacetime`.

    Parameters
    ----------
    path : path-like
        The TOML spec file.
    overrides : mapping of str to float, optional
        Parameter values replacing the file's (what ``--set NAME=VALUE`` does on the command line).
    **values : float
        The same, as keywords: ``derive.load(path, M=2.0)``.
    """
    from derive.spec.loader import load as _load

    merged = dict(overrides or {})
    merged.update(values)
    return _load(path, merged or None)


__all__ = ["load", "DeriveError", "InputError", "NotSupported", "AccuracyError", "__version__"]
