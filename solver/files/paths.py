"""Output file paths: checked before any work starts, their folder created.

Every writer of a file the user names (grid tables, arcs as OEM, survey results) calls
:func:`prepare_output` first, so a wrong suffix, a folder where a file should be, or a folder
that cannot be created is one :class:`~solver.errors.InputError` naming the option, before
minutes of computing are spent. A folder that does not exist yet is created, as a survey's
results folder always was.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from solver.errors import InputError


def prepare_output(path: str | Path, *, field: str, suffixes: Sequence[str] | None = None) -> Path:
    """Check an output file path and create the folder it goes in.

    Parameters
    ----------
    path : str or Path
        The file to be written.
    field : str
        The option or setting that named it (``"--out"``), for the error message.
    suffixes : sequence of str, optional
        Accepted suffixes, lower case with the dot (``(".csv", ".parquet")``).

    Returns
    -------
    Path
        ``path`` as a Path; its parent folder exists.

    Raises
    ------
    InputError
        Wrong suffix, ``path`` is an existing folder, or its folder cannot be created (a file
        is in the way, no permission).
    """
    out = Path(path)
    if suffixes is not None and out.suffix.lower() not in suffixes:
        accepted = " or ".join(suffixes)
        raise InputError(field, str(path), f"a file name ending in {accepted}")
    if out.is_dir():
        raise InputError(field, str(path), "a file name, not a folder")
    folder = out.parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except FileExistsError:
        raise InputError(field, str(path), f"a path whose folder {folder} is not a file") from None
    except OSError as exc:
        raise InputError(
            field, str(path), f"a folder that can be created ({folder}: {exc.strerror})"
        ) from None
    if not folder.is_dir():
        raise InputError(field, str(path), f"a path whose folder {folder} is not a file")
    return out


__all__ = ["prepare_output"]
