"""Where numba keeps the compiled kernels: a folder named after the engine's own source.

numba's on-disk cache (``cache=True``) keys a kernel by the content of its own file only, yet
the compiled functions it calls from other modules are built into it. After a change to one of
those (a Lambert step, an ephemeris read, the flyby model), a machine with the old kernel cached
would keep running the old code and give the old numbers without a word. So the cache folder is
named after a digest of every source file of the engine: any change to any of them starts a new
folder, compiled once (and announced, as on a first run: ``solver.mechanics.kernels``).

A ``NUMBA_CACHE_DIR`` set by whoever runs the engine is left as it is (the tests use one to
prove a first run announces its compile).
"""

from __future__ import annotations

import hashlib
import os
import sys
from pathlib import Path

ENV_CACHE_DIR = "NUMBA_CACHE_DIR"
_DIGEST_CHARS = 16


def source_digest(root: Path | None = None) -> str:
    """Digest of every ``.py`` file under the engine's package (names and bytes), hex.

    Parameters
    ----------
    root : Path, optional
        The package folder (default: this package).
    """
    root = root or Path(__file__).resolve().parent
    digest = hashlib.sha256()
    for path in sorted(root.rglob("*.py")):
        digest.update(path.relative_to(root).as_posix().encode())
        digest.update(b"\0")
        digest.update(path.read_bytes())
        digest.update(b"\0")
    return digest.hexdigest()[:_DIGEST_CHARS]


def _writable(folder: Path) -> bool:
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError:
        return False
    return os.access(folder, os.W_OK)


def key_compiled_cache() -> str | None:
    """Point numba's cache at the folder of the current source; returns the folder (None when
    ``NUMBA_CACHE_DIR`` was already set, or no folder could be written).

    The folder is ``__pycache__/numba-<digest>`` inside the package, beside Python's own
    compiled files, or in the user's cache folder when the package is read-only.
    """
    if os.environ.get(ENV_CACHE_DIR):
        return None
    package = Path(__file__).resolve().parent
    name = f"numba-{source_digest(package)}"
    user_cache = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache")
    for folder in (package / "__pycache__" / name, user_cache / "arcwindow" / name):
        if _writable(folder):
            os.environ[ENV_CACHE_DIR] = str(folder)  # worker processes inherit it
            config = sys.modules.get("numba.core.config")
            if config is not None:  # numba read its settings already: tell it too
                config.CACHE_DIR = str(folder)  # type: ignore[attr-defined]
            return str(folder)
    return None
