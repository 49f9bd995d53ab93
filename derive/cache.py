"""On-disk cache of symbolic results, keyed on everything that changes the answer.

A key is the sha256 of the inputs' exact sympy representation (``srepr``, which includes assumptions) and
derive's version.  Values are pickled and written atomically (temporary file, then rename), so an
interrupted run never leaves half a file.  ``DERIVE_CACHE_DIR`` moves the cache (default
``~/.cache/derive``); ``DERIVE_NO_CACHE=1`` turns it off.
"""

from __future__ import annotations

import hashlib
import os
import pickle
import tempfile
from pathlib import Path

from derive import __version__


def cache_root() -> Path | None:
    if os.environ.get("DERIVE_NO_CACHE"):
        return None
    root = os.environ.get("DERIVE_CACHE_DIR") or os.path.join(os.path.expanduser("~"), ".cache", "derive")
    return Path(root)


def key_of(*parts) -> str:
    """A hash of the parts' exact representations and derive's version."""
    import sympy as sp

    digest = hashlib.sha256(__version__.encode())
    for part in parts:
        text = sp.srepr(part) if isinstance(part, sp.Basic) else repr(part)
        digest.update(b"\x00" + text.encode())
    return digest.hexdigest()[:32]


class DiskCache:
    """Pickled values under root/<key>/<name>.pickle."""

    def __init__(self, key: str, root: Path | None = None):
        self.key = key
        self.root = root if root is not None else cache_root()

    def _file(self, name: str) -> Path | None:
        if self.root is None:
            return None
        return self.root / self.key / f"{name}.pickle"

    def get(self, name: str):
        path = self._file(name)
        if path is None or not path.is_file():
            return None
        try:
            with open(path, "rb") as handle:
                return pickle.load(handle)
        except Exception:   # a damaged or incompatible entry is recomputed, never trusted
            return None

    def put(self, name: str, value) -> None:
        path = self._file(name)
        if path is None:
            return
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            payload = pickle.dumps(value)
            fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
            with os.fdopen(fd, "wb") as handle:
                handle.write(payload)
            os.replace(tmp, path)
        except Exception:   # the cache is an optimisation: failing to write it is not an error
            pass
