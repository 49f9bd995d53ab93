"""On-disk cache of symbolic results, keyed on everything that changes the answer, trusted only when private.

Keys.  A key is the sha256 of the inputs' exact sympy representation (``srepr``, which spells out every
symbol's assumptions, element by element for a matrix), derive's version and the cache format.

Trust.  The cache folder (``DERIVE_CACHE_DIR``, default ``~/.cache/derive``; ``DERIVE_NO_CACHE=1`` turns it
off) is used only when it belongs to the user running derive and neither its group nor others may write to
it; otherwise a warning says so and the run goes on without a disk cache.  Every entry is signed with an
HMAC-SHA256 under a per-user key kept in the folder (a private file, created on first use), and its signature
is checked before the entry is unpickled: a file that someone else wrote, or that was changed, is never
loaded (so a pickle cannot run code as the user).  An entry that is corrupt, unsigned, of another format or of
an unexpected type is recomputed, never a crash.  Writes are atomic (temporary file, then rename).

Generated kernels are not cached as code: their source is generated each time and run from memory
(:mod:`derive.codegen.kernel`); the files are written for people to read.
"""

from __future__ import annotations

import hashlib
import hmac
import os
import pickle
import stat
import sys
import tempfile
from pathlib import Path

from derive import __version__

FORMAT = "2"               # the layout of entries: tag (32 bytes) + pickle
KEY_FILE = "signing.key"
_warned: set[str] = set()


def _warn(root: Path, why: str) -> None:
    if str(root) not in _warned:
        _warned.add(str(root))
        print(f"derive: warning: not using the cache folder {root}: {why}; going on without a disk cache "
              "(set DERIVE_CACHE_DIR to a private folder of yours)", file=sys.stderr)


def _private(path: Path, folder: bool) -> str | None:
    """Why ``path`` may not be trusted, or None when it is the user's own and writable by the user alone."""
    try:
        info = os.stat(path)
    except OSError as exc:
        return f"cannot read it ({exc.strerror})"
    if folder and not stat.S_ISDIR(info.st_mode):
        return "it is not a folder"
    if not folder and not stat.S_ISREG(info.st_mode):
        return "it is not a regular file"
    if hasattr(os, "getuid") and info.st_uid != os.getuid():
        return "it belongs to another user"
    if info.st_mode & 0o022:
        return "its group or others may write to it"
    if not folder and info.st_mode & 0o044:
        return "its group or others may read it"
    return None


def cache_root() -> Path | None:
    """The cache folder, created private if missing; None when the cache is off or cannot be trusted."""
    if os.environ.get("DERIVE_NO_CACHE"):
        return None
    root = Path(os.environ.get("DERIVE_CACHE_DIR") or os.path.join(os.path.expanduser("~"), ".cache", "derive"))
    try:
        if not root.exists():
            root.mkdir(mode=0o700, parents=True, exist_ok=True)
    except OSError as exc:
        _warn(root, f"it cannot be created ({exc.strerror})")
        return None
    why = _private(root, folder=True)
    if why:
        _warn(root, why)
        return None
    return root


def _signing_key(root: Path) -> bytes | None:
    path = root / KEY_FILE
    if not path.exists():
        # written whole under a private temporary name, then linked into place: another process (parallel test
        # workers, two commands at once) sees no key or the whole key, never a half-written one
        tmp = root / f".{KEY_FILE}.{os.getpid()}.tmp"
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        except OSError:
            return None
        try:
            with os.fdopen(fd, "wb") as handle:
                handle.write(os.urandom(32))
            os.link(tmp, path)
        except FileExistsError:
            pass
        except OSError:
            return None
        finally:
            tmp.unlink(missing_ok=True)
    why = _private(path, folder=False)
    if why:
        _warn(root, f"its signing key {path.name}: {why}")
        return None
    try:
        key = path.read_bytes()
    except OSError:
        return None
    return key if len(key) == 32 else None


def key_of(*parts) -> str:
    """A hash of the parts' exact representations (assumptions included), derive's version and the format."""
    import sympy as sp

    digest = hashlib.sha256(f"{__version__}\x00{FORMAT}".encode())
    for part in parts:
        if isinstance(part, sp.MatrixBase):
            text = "Matrix" + repr(part.shape) + "".join("\x01" + sp.srepr(e) for e in part)
        elif isinstance(part, sp.Basic):
            text = sp.srepr(part)
        elif isinstance(part, (str, int, float, bool)) or part is None:
            text = repr(part)
        else:
            raise TypeError(f"cannot key the cache on a {type(part).__name__}")
        digest.update(b"\x00" + text.encode())
    return digest.hexdigest()[:32]


class DiskCache:
    """Signed, pickled values under root/<key>/<name>.entry."""

    def __init__(self, key: str, root: Path | None = None):
        self.key = key
        self._root = root
        self._checked = False

    @property
    def root(self) -> Path | None:
        if not self._checked:
            self._root = self._root if self._root is not None else cache_root()
            if self._root is not None and _private(self._root, folder=True):
                _warn(self._root, _private(self._root, folder=True))
                self._root = None
            self._checked = True
        return self._root

    def _file(self, name: str) -> Path | None:
        root = self.root
        if root is None:
            return None
        return root / self.key / f"{name}.entry"

    def get(self, name: str, expected: type | tuple | None = None):
        """The cached value, or None when absent, untrusted, damaged or not of the ``expected`` type."""
        path = self._file(name)
        if path is None or not path.is_file():
            return None
        key = _signing_key(self.root)
        if key is None or _private(path.parent, folder=True) or _private(path, folder=False):
            return None
        try:
            data = path.read_bytes()
            tag, payload = data[:32], data[32:]
            if not hmac.compare_digest(tag, hmac.new(key, payload, hashlib.sha256).digest()):
                return None
            value = pickle.loads(payload)
        except Exception:   # a damaged or incompatible entry is recomputed, never trusted
            return None
        if expected is not None and not isinstance(value, expected):
            return None
        return value

    def put(self, name: str, value) -> None:
        path = self._file(name)
        if path is None:
            return
        key = _signing_key(self.root)
        if key is None:
            return
        try:
            path.parent.mkdir(mode=0o700, exist_ok=True)
            if _private(path.parent, folder=True):
                return
            payload = pickle.dumps(value)
            tag = hmac.new(key, payload, hashlib.sha256).digest()
            fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
            with os.fdopen(fd, "wb") as handle:
                handle.write(tag + payload)
            os.replace(tmp, path)
        except Exception:   # the cache is an optimisation: failing to write it is not an error
            pass
