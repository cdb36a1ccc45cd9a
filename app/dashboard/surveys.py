"""Survey results for the survey page: the files on the shelf, their ranked rows, and the
window case that opens a target around its best arc.

Plain data, testable without Dash. Results files are the Parquet files ``arcwindow survey``
writes; the page lists those in the survey folder (``--survey-dir``, ``ARCWINDOW_SURVEY_DIR``,
``<data folder>/surveys``).
"""

from __future__ import annotations

import re
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING
from urllib.parse import quote

from solver.errors import InputError

from .case_catalogue import CaseCatalogue
from .view_state import MAP_METRICS

if TYPE_CHECKING:  # pandas is imported when a results file is first read (a faster start)
    import pandas as pd

_NAME_RE = re.compile(r"[A-Za-z0-9_.-]{1,120}")
TABLE_ROWS = 200
"""Rows shown on the page; the rest stay in the file (the page says how many)."""


@dataclass(frozen=True)
class SurveyTable:
    """One results file as the page shows it."""

    name: str
    frame: pd.DataFrame
    base_title: str
    years: tuple[int, int]
    metric: str
    targets: int
    within: int
    engine: str

    @property
    def summary(self) -> str:
        from solver.window.metrics import METRICS

        first, last = self.years
        meta = METRICS.get(self.metric)
        by = f"{meta.label} ({meta.unit})" if meta else self.metric
        return (
            f"{self.base_title}: {self.targets} targets, departures {first}-{last}, ranked "
            f"by {by}; {self.within} with an arc within limits ({self.engine})"
        )


class SurveyShelf:
    """The results files of one server's survey folder."""

    def __init__(self, folder: Path, catalogue: CaseCatalogue) -> None:
        self.folder = Path(folder)
        self.catalogue = catalogue
        self._lock = threading.Lock()
        self._loaded: dict[str, tuple[float, SurveyTable]] = {}

    def names(self) -> list[str]:
        """Results files on the shelf, newest first (by name without ``.parquet``)."""
        if not self.folder.is_dir():
            return []
        files = sorted(self.folder.glob("*.parquet"), key=lambda p: p.stat().st_mtime, reverse=True)
        return [p.stem for p in files if _NAME_RE.fullmatch(p.stem)]

    def path(self, name: str) -> Path:
        """The file of a results name, found in a listing of the shelf (never built from the
        name a page sent)."""
        if not isinstance(name, str) or not _NAME_RE.fullmatch(name):
            raise InputError("results", str(name)[:60], "the name of a results file on the shelf")
        for listed in self.folder.glob("*.parquet") if self.folder.is_dir() else []:
            if listed.stem == name and listed.is_file():
                return listed
        shown = ", ".join(self.names()[:20]) or "none yet"
        raise InputError("results", name, f"a results file on the shelf: {shown}")

    def table(self, name: str) -> SurveyTable:
        """The ranked rows of a results file (read again when the file changes)."""
        from solver.survey.results import load_results, read_survey_metadata

        path = self.path(name)
        mtime = path.stat().st_mtime
        with self._lock:
            hit = self._loaded.get(name)
            if hit and hit[0] == mtime:
                return hit[1]
        try:
            frame = load_results(path)
            meta = read_survey_metadata(path)
        except Exception:  # the engine's message names the server's path: not for the page
            raise InputError(
                "results", name, "a readable survey results file (this one could not be read)"
            ) from None
        years = tuple(meta.get("years") or (0, 0))
        engines = sorted(set(frame["engine_version"].astype(str)))
        table = SurveyTable(
            name=name,
            frame=frame,
            base_title=str(meta.get("base_case_title", "")),
            years=(int(years[0]), int(years[-1])),
            metric=str(meta.get("settings", {}).get("metric", "c3_km2_s2")),
            targets=len(frame),
            within=int(frame["within_limits"].sum()),
            engine="arcwindow " + ", ".join(engines),
        )
        with self._lock:
            self._loaded[name] = (mtime, table)
        return table

    def open_target(self, name: str, target: str) -> str:
        """The main page's query that shows ``target``'s window map around its best arc.

        The window case is built from the survey's own base case and stored like an uploaded
        case, so the link works for every viewer of the server.
        """
        from solver.survey.results import results_base_case
        from solver.survey.targets import case_for_target

        table = self.table(name)
        rows = table.frame[table.frame["target"] == target]
        if rows.empty:
            raise InputError("target", str(target)[:60], f"a target of the survey '{name}'")
        row = rows.iloc[0]
        import pandas as pd

        if pd.isna(row["departure_jd_tdb"]):
            raise InputError("target", target, f"a target with an arc ({row['reason']})")
        case = case_for_target(
            results_base_case(self.path(name)),
            row,
            float(row["departure_jd_tdb"]),
            float(row["arrival_jd_tdb"]),
        )
        case_id = self.catalogue.add_case(case)
        metric = table.metric if table.metric in MAP_METRICS else "c3_km2_s2"
        selected = f"{_minute(row['departure_utc'])}~{_minute(row['arrival_utc'])}"
        return f"?case={case_id}&metric={metric}&arcs=best&sel={quote(selected, safe=':~-._')}"


def _minute(utc: str) -> str:
    """``2032-06-24T00:08:47Z`` -> ``2032-06-24T00:09Z`` (the page's selection format)."""
    import pandas as pd

    stamp = pd.Timestamp(str(utc).rstrip("Z")).round("min")
    return stamp.strftime("%Y-%m-%dT%H:%MZ")
