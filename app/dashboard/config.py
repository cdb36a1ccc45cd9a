"""Where the dashboard keeps things, settled in one place: argument, then environment variable,
then default.

* grid cache folder: ``cache_dir`` (``--cache-dir``), ``ARCWINDOW_CACHE_DIR``, the per-user
  cache folder of ``solver.files.cache``;
* data folder (shortlist, uploaded cases): ``data_dir`` (``--data-dir``), ``ARCWINDOW_DATA_DIR``,
  ``platformdirs.user_data_dir("arcwindow")``;
* sample cases folder: ``cases_dir``, ``ARCWINDOW_CASES_DIR``, this repository's
  ``sample_cases/``;
* survey results folder (the survey page lists its ``*.parquet``): ``surveys_dir``
  (``--survey-dir``), ``ARCWINDOW_SURVEY_DIR``, ``<data folder>/surveys``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

ENV_DATA_DIR = "ARCWINDOW_DATA_DIR"
ENV_CASES_DIR = "ARCWINDOW_CASES_DIR"
ENV_SURVEY_DIR = "ARCWINDOW_SURVEY_DIR"
ENV_CACHE_DIR = "ARCWINDOW_CACHE_DIR"  # also read by solver.files.cache.GridCache

REPO_ROOT = Path(__file__).resolve().parents[2]


def _pick(argument: str | os.PathLike | None, env: str, default: Path) -> Path:
    if argument is not None and str(argument).strip():
        return Path(argument).expanduser()
    value = os.environ.get(env, "").strip()
    if value:
        return Path(value).expanduser()
    return default


@dataclass(frozen=True)
class Settings:
    """Resolved folders of one dashboard server."""

    cache_dir: Path
    data_dir: Path
    cases_dir: Path
    surveys_dir: Path

    @classmethod
    def resolve(
        cls,
        cache_dir: str | os.PathLike | None = None,
        data_dir: str | os.PathLike | None = None,
        cases_dir: str | os.PathLike | None = None,
        surveys_dir: str | os.PathLike | None = None,
    ) -> Settings:
        import platformdirs

        from app.samples import SAMPLE_DIR
        from solver.files.cache import default_directory

        data = _pick(data_dir, ENV_DATA_DIR, Path(platformdirs.user_data_dir("arcwindow")))
        return cls(
            cache_dir=_pick(cache_dir, ENV_CACHE_DIR, default_directory()),
            data_dir=data,
            cases_dir=_pick(cases_dir, ENV_CASES_DIR, SAMPLE_DIR),
            surveys_dir=_pick(surveys_dir, ENV_SURVEY_DIR, data / "surveys"),
        )

    @property
    def shortlist_path(self) -> Path:
        return self.data_dir / "shortlist.json"

    @property
    def uploads_dir(self) -> Path:
        return self.data_dir / "uploaded_cases"


ASSETS_DIR = REPO_ROOT / "assets"
