"""The numba cache policy, in one place: every kernel of the package is compiled with
:func:`njit` from here.

Kernels are ``numba.njit(cache=True)``: the compiled machine code is kept on disk
(beside the sources in ``__pycache__``, or under ``NUMBA_CACHE_DIR`` when that is set),
so only the very first start on a machine pays for compiling. numba keys each cache
entry on its own source file only: a kernel whose callee in *another* file changed would
load stale machine code. To close that gap this module stamps the package's cache with a
digest of every kernel source file of the package; when the digest differs from the stamp (an
edited kernel, an upgraded install), all of the package's cache files are deleted before
any kernel is loaded, and the new stamp is written. Nothing else in the package touches
numba's cache.

Where the cache goes (:func:`choose_cache_dir`): ``NUMBA_CACHE_DIR`` when set and
writable, else beside the sources when writable; otherwise (a read-only install, an
unwritable ``NUMBA_CACHE_DIR``) the user's cache (``$XDG_CACHE_HOME`` or
``~/.cache``, then the temporary directory) under ``boom-advisory/numba``, with a
one-line notice on stderr; when nothing at all is writable the kernels are compiled in
memory at every start (and a notice says so) instead of failing at import.
"""

from __future__ import annotations

import hashlib
import os
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import numba

F = TypeVar("F", bound=Callable[..., Any])

PACKAGE_DIR = Path(__file__).resolve().parent
STAMP_NAME = "boom-advisory-kernels.sha256"  #: the stamp file, at the top of the cache


def source_digest(root: Path = PACKAGE_DIR) -> str:
    """SHA-256 over the relative path and bytes of every kernel source of the package
    (each ``.py`` file that compiles kernels through this module)."""
    h = hashlib.sha256()
    for path in sorted(root.rglob("*.py")):
        data = path.read_bytes()
        if b"from advisory.jit import" in data:
            h.update(str(path.relative_to(root)).encode())
            h.update(data)
    return h.hexdigest()


def _cache_roots() -> list[Path]:
    """Where numba keeps this package's cache files."""
    custom = os.environ.get("NUMBA_CACHE_DIR")
    if custom:
        return [Path(custom)]
    return [p for p in PACKAGE_DIR.rglob("__pycache__") if p.is_dir()]


def refresh_cache(root: Path = PACKAGE_DIR) -> bool:
    """Delete the package's numba cache files when the sources changed since the stamp.

    Returns
    -------
    bool
        True when stale cache files were looked for and deleted (the stamp is new).
    """
    digest = source_digest(root)
    custom = os.environ.get("NUMBA_CACHE_DIR")
    stamp = (Path(custom) if custom else root / "__pycache__") / STAMP_NAME
    try:
        if stamp.read_text().strip() == digest:
            return False
    except OSError:
        pass
    try:
        for cache_dir in _cache_roots():
            for pattern in ("*.nbi", "*.nbc"):
                for f in cache_dir.rglob(pattern):
                    # under NUMBA_CACHE_DIR numba mirrors the source path: keep to ours
                    if custom is None or root.name in f.parts:
                        f.unlink(missing_ok=True)
        stamp.parent.mkdir(parents=True, exist_ok=True)
        tmp = stamp.with_suffix(f".{os.getpid()}.tmp")
        tmp.write_text(digest + "\n")
        os.replace(tmp, stamp)
    except OSError:
        return False  # a read-only install: numba compiles in memory
    return True


def writable_dir(path: Path) -> bool:
    """True when files can be created in ``path`` (made if missing)."""
    try:
        path.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=path):
            pass
    except OSError:
        return False
    return True


def choose_cache_dir() -> bool:
    """Pick a writable cache directory for numba (see the module notes).

    Sets ``NUMBA_CACHE_DIR`` (environment, for build processes too, and numba's
    config) when the cache moves to a fallback, with one notice line on stderr.

    Returns
    -------
    bool
        False when no directory is writable (kernels are then compiled in memory).
    """
    custom = os.environ.get("NUMBA_CACHE_DIR")
    if custom and writable_dir(Path(custom)):
        return True
    if not custom and writable_dir(PACKAGE_DIR / "__pycache__"):
        return True
    xdg = os.environ.get("XDG_CACHE_HOME")
    user = Path(xdg) if xdg else Path.home() / ".cache"
    why = f"NUMBA_CACHE_DIR {custom}" if custom else f"the install ({PACKAGE_DIR})"
    for base in (user, Path(tempfile.gettempdir())):
        cand = base / "boom-advisory" / "numba"
        if writable_dir(cand):
            os.environ["NUMBA_CACHE_DIR"] = str(cand)
            numba.config.CACHE_DIR = str(cand)  # type: ignore[attr-defined]
            print(f"boom-advisory: notice: {why} is not writable; compiled kernels are "
                  f"cached in {cand}", file=sys.stderr)
            return True
    print(f"boom-advisory: notice: {why} is not writable and no cache directory is; "
          "kernels are compiled in memory at every start", file=sys.stderr)
    return False


CACHING = choose_cache_dir()  #: False: no writable cache anywhere (compile in memory)
if CACHING:
    refresh_cache()


def njit(*args: Any, **kwargs: Any) -> Any:
    """``numba.njit`` with the package's cache policy (``cache=True``, see the module).

    Use exactly as ``numba.njit``: ``@njit(cache=True)`` or ``@njit``.
    """
    kwargs["cache"] = CACHING
    if args and callable(args[0]) and not kwargs.keys() - {"cache"}:
        return numba.njit(cache=CACHING)(args[0])
    return numba.njit(*args, **kwargs)
