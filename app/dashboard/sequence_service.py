"""The sequence page's server side: sequence cases, searches in the job pool, the candidate a view
shows, leg maps, figures, the shortlist and downloads, joined for the page's callbacks.

One ``SequenceService`` per server, beside the window page's ``WindowService``, whose case
catalogue, job pool (``grid_jobs.GridJobs``: searches run in its search lane with the same
waiters, leases, per-address limits and cancellation as grids) and shortlist it shares.

* **Searches** are cached like grids, by a key over the sequence case (its hash), the search
  settings and ``solver.ENGINE_VERSION``: in memory (the pool's LRU) and on disk (the grid
  cache folder; an entry holds each candidate's link parameters, and reading it evaluates them
  again exactly). Nothing is computed at import or start-up: a search starts when a view asks.
* **The candidate a view shows** is the search's candidate of its rank, or, when a leg-map
  click (or a link) re-timed it, the one its dates name, evaluated exactly
  (``solver.sequence.record.candidate_from_link``).
* **Leg maps** are computed in the request that draws them (one batched evaluation,
  ``solver.sequence.leg_map``) and kept in a small LRU; once a search is drawn, the maps of its
  ranked candidates (the view's leg, metric and span) are computed on a background thread, so
  choosing another candidate finds its map ready.
"""

from __future__ import annotations

import logging
import math
import threading
import time
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import plotly.graph_objects as go

from solver.digest import cache_key
from solver.ephemeris.timescales import jd_tdb_to_utc
from solver.errors import InputError
from solver.sequence.evaluate import SequenceModel
from solver.sequence.leg_map import LegMap, leg_axes, leg_map
from solver.sequence.provenance import sequence_hash, sequence_provenance
from solver.sequence.record import candidate_from_link, candidate_record, link_parameters
from solver.sequence.result import Candidate
from solver.sequence.spec import SequenceCase, sequence_case_from_dict

from . import figures, sequence_figures
from .display_data import display_name
from .grid_jobs import Ticket, Work
from .sequence_display import (
    candidate_details,
    encounter_chart_data,
    leg_family_data,
    leg_map_data,
    sequence_scene,
    worst_margin_km,
)
from .sequence_view import (
    SequenceView,
    apply_changes,
    check_leg_map_size,
    from_query,
    to_query,
)
from .window_service import WindowService, _Memo

_LOG = logging.getLogger(__name__)

RESULT_FORMAT = 1
"""Version of a search result's disk-cache entry (its metadata layout)."""
PREWARM_WORKERS = 1


@dataclass
class SearchOutcome:
    """A finished search: its ranked candidates (each evaluated exactly) and what it cost."""

    key: str
    mode: str
    candidates: list[Candidate]
    seconds: float = 0.0
    evaluations: int = 0
    interrupted: bool = False
    from_cache: bool = False
    notes: list[str] = field(default_factory=list)

    @property
    def summary(self) -> str:
        n = len(self.candidates)
        within = sum(1 for c in self.candidates if c.within_limits)
        how = "grid search" if self.mode == "grid" else "global search"
        text = (
            f"{n} candidate{'s' if n != 1 else ''} ({within} within limits) from a {how} of "
            f"{self.evaluations:,} evaluations in {self.seconds:.1f} s"
        )
        if self.interrupted:
            text += ", stopped at its time limit"
        if self.from_cache:
            text += " (read from the cache)"
        return text + "."


@dataclass(frozen=True)
class Shown:
    """The candidate a view shows, with where it comes from."""

    candidate: Candidate
    rank: int
    ranked: Candidate  # the search's candidate of that rank
    retimed: bool

    @property
    def rank_text(self) -> str:
        if self.retimed:
            return f"re-timed from candidate {self.rank}"
        return f"{self.rank}"


class SequenceService:
    """Sequence cases, searches, candidates, leg maps and figures for one server."""

    def __init__(self, window: WindowService) -> None:
        self.window = window
        self.catalogue = window.catalogue
        self.jobs = window.grids
        self.shortlist = window.shortlist
        self._cases = _Memo(32)
        self._models = _Memo(16)
        self._candidates = _Memo(64)
        self._leg_maps = _Memo(24)
        self._notes: dict[str, str] = {}
        self._prewarm = ThreadPoolExecutor(PREWARM_WORKERS, thread_name_prefix="arcwindow-legmap")
        self._prewarmed: set[str] = set()
        self._lock = threading.Lock()

    # -- cases and views -------------------------------------------------------------------
    def default_id(self) -> str:
        ids = self.catalogue.sequence_ids()
        return ids[0] if ids else ""

    def sequence_case(self, view: SequenceView) -> SequenceCase:
        """The sequence case a view searches: its file with the view's changes, validated."""
        key = (view.case, view.changes)
        hit = self._cases.get(key)
        if hit is not None:
            return hit
        if not self.catalogue.is_sequence(view.case):
            raise InputError("case", view.case, "a case with a [sequence] section")
        document = apply_changes(self.catalogue.document(view.case), view.change_dict())
        # validated by the engine, dates included (each body's ephemeris or element range)
        sequence_case = sequence_case_from_dict(document, source_path=f"{view.case}.toml")
        return self._cases.put(key, sequence_case)

    def view_from_url(self, search: str | None) -> tuple[SequenceView, SequenceCase, list[str]]:
        """The view a link asks for, made valid (refused parts dropped and named)."""
        view = from_query(search, self.default_id())
        notes = list(view.notes)
        if not self.catalogue.is_sequence(view.case):
            if self.catalogue.exists(view.case):
                notes.append(f"link: '{view.case}' is not a sequence case; showing a sample")
            else:
                notes.append(f"link: there is no case '{view.case}' here; showing a sample")
            view = SequenceView(case=self.default_id())
        try:
            sequence_case = self.sequence_case(view)
        except InputError as exc:
            changes = view.change_dict()
            key = exc.field
            if key in changes:  # drop the refused change, keep the others
                changes.pop(key)
                notes.append(f"link: {exc}; ignored")
                return self._without(view, changes, notes)
            notes.append(f"link: {exc}. Showing the case file's own settings.")
            view = replace(view, changes=())
            sequence_case = self.sequence_case(view)
        return replace(view, notes=()), sequence_case, notes

    def _without(self, view, changes, notes):
        trial = view.with_changes(changes)
        try:
            return replace(trial, notes=()), self.sequence_case(trial), notes
        except InputError as exc:
            notes.append(f"link: {exc}. Showing the case file's own settings.")
            trial = replace(view, changes=())
            return replace(trial, notes=()), self.sequence_case(trial), notes

    def view_for_case(self, case_id: str) -> tuple[SequenceView, SequenceCase]:
        view = SequenceView(case=case_id)
        return view, self.sequence_case(view)

    def model(self, sequence_case: SequenceCase, name: str) -> SequenceModel:
        key = (sequence_hash(sequence_case), name)
        hit = self._models.get(key)
        if hit is not None:
            return hit
        return self._models.put(
            key, SequenceModel(sequence_case.case, sequence_case.sequence(name))
        )

    # -- searches --------------------------------------------------------------------------
    def search_key(self, view: SequenceView, sequence_case: SequenceCase) -> str:
        from solver import ENGINE_VERSION

        return cache_key(
            {
                "kind": "sequence-search",
                "format": RESULT_FORMAT,
                "sequence": sequence_hash(sequence_case),
                "mode": view.mode,
                "top": view.top,
                "time_s": view.time_s if view.mode == "global" else None,
                "seed": view.seed if view.mode == "global" else None,
                "engine": ENGINE_VERSION,
            }
        )

    def request_search(self, view: SequenceView, viewer: str, address: str = "") -> Ticket:
        """Start or join the search of a view (or find it done)."""
        sequence_case = self.sequence_case(view)
        key = self.search_key(view, sequence_case)
        return self.jobs.submit(self._work(view, sequence_case, key), viewer, address)

    def ticket(self, key: str, viewer: str) -> Ticket:
        return self.jobs.ticket(key, viewer)

    def result(self, view: SequenceView) -> SearchOutcome | None:
        """The view's search, if it is done and in memory."""
        sequence_case = self.sequence_case(view)
        hit = self.jobs.memory_get(self.search_key(view, sequence_case))
        return hit if isinstance(hit, SearchOutcome) else None

    def _work(self, view: SequenceView, sequence_case: SequenceCase, key: str) -> Work:
        mode, top, time_s, seed = view.mode, view.top, view.time_s, view.seed
        notes = self._notes
        cache = self.jobs.cache

        def compute(report, check) -> SearchOutcome:
            start = time.perf_counter()
            if mode == "grid":
                from solver.sequence.grid import GridSettings, grid_search_case

                legs = sum(len(s.legs) for s in sequence_case.sequences)
                done = [0]

                def grid_progress(text: str) -> None:
                    done[0] += 1
                    notes[key] = text
                    report(min(done[0], legs), legs + 1)

                report(0, legs + 1)
                grid = grid_search_case(
                    sequence_case, GridSettings(top=top), progress=grid_progress
                )
                candidates, evaluations, interrupted = grid.candidates, grid.evaluations, False
            else:
                from solver.sequence.search import SearchSettings, search_case

                def search_progress(text: str) -> None:
                    notes[key] = text
                    elapsed = time.perf_counter() - start
                    report(int(1000 * min(0.99, elapsed / time_s)), 1000)

                report(0, 1000)
                found = search_case(
                    sequence_case,
                    SearchSettings(top=top, seed=seed, time_limit_s=time_s),
                    progress=search_progress,
                )
                candidates, evaluations = found.candidates, found.evaluations
                interrupted = found.interrupted
            notes.pop(key, None)
            return SearchOutcome(
                key=key,
                mode=mode,
                candidates=list(candidates),
                seconds=time.perf_counter() - start,
                evaluations=evaluations,
                interrupted=interrupted,
            )

        def load() -> SearchOutcome | None:
            if cache is None:
                return None
            hit = cache.get(key)
            if hit is None or hit.metadata.get("kind") != "sequence-search":
                return None
            try:
                candidates = [candidate_from_link(sequence_case, p) for p in hit.metadata["links"]]
            except (InputError, KeyError, TypeError):
                return None
            return SearchOutcome(
                key=key,
                mode=mode,
                candidates=candidates,
                seconds=float(hit.metadata.get("seconds", 0.0)),
                evaluations=int(hit.metadata.get("evaluations", 0)),
                interrupted=bool(hit.metadata.get("interrupted", False)),
                from_cache=True,
            )

        def store(outcome: SearchOutcome) -> None:
            if cache is None or outcome.from_cache:
                return
            links = [link_parameters(c, view.case) for c in outcome.candidates]
            metadata = {
                "kind": "sequence-search",
                "format": RESULT_FORMAT,
                "links": links,
                "seconds": outcome.seconds,
                "evaluations": outcome.evaluations,
                "interrupted": outcome.interrupted,
                "mode": outcome.mode,
                "provenance": sequence_provenance(sequence_case),
            }
            cache.put(key, {"rank": np.arange(len(links), dtype=np.int32)}, metadata)

        slow = self.window.grids.slowdown
        return Work(
            key=key,
            lane="search",
            compute=compute,
            nbytes=lambda outcome: 200_000 * max(1, len(outcome.candidates)),
            load=load,
            store=store,
            pause=slow.search_pause,
            note=lambda: notes.get(key, ""),
        )

    # -- the candidate shown ---------------------------------------------------------------
    def shown(self, view: SequenceView, outcome: SearchOutcome) -> Shown:
        """The candidate a view shows (InputError when its rank or dates are refused)."""
        if not outcome.candidates:
            raise InputError("candidates", "none", "a search that found a candidate")
        rank = min(view.cand, len(outcome.candidates))
        ranked = outcome.candidates[rank - 1]
        if view.at is None:
            return Shown(ranked, rank, ranked, False)
        own = link_parameters(ranked, view.case)
        if view.seq == own["seq"] and "~".join(view.at) == own["at"]:
            return Shown(ranked, rank, ranked, False)  # a link that names the ranked dates
        sequence_case = self.sequence_case(view)
        key = (outcome.key, tuple(sorted(view.link.items())))
        hit = self._candidates.get(key)
        if hit is None:
            hit = self._candidates.put(key, candidate_from_link(sequence_case, view.link))
        return Shown(hit, rank, ranked, True)

    def retime(self, view: SequenceView, x: Any, y: Any) -> SequenceView:
        """The view re-timed to the leg-map cell nearest a clicked point."""
        from .view_state import plot_x_to_unix_ms

        outcome = self.result(view)
        if outcome is None:
            raise ValueError("the search is not done")
        shown = self.shown(view, outcome)
        sequence_case = self.sequence_case(view)
        model = self.model(sequence_case, shown.candidate.sequence)
        k = view.leg - 1
        if not 0 <= k < len(model.spec.legs):
            raise ValueError("no such leg")
        a, b = model.spec.leg_epochs(k)
        start, end = leg_axes(shown.candidate.epochs_jd_tdb, a, b, view.span_days, view.step_days)
        from .display_data import display_ms

        x_ms, y_ms = plot_x_to_unix_ms(x), plot_x_to_unix_ms(y)
        if not (math.isfinite(x_ms) and math.isfinite(y_ms)):
            raise ValueError("coordinates are not dates")
        i = int(np.argmin(np.abs(display_ms(start) - x_ms)))
        j = int(np.argmin(np.abs(display_ms(end) - y_ms)))
        epochs = np.array(shown.candidate.epochs_jd_tdb, dtype=float)
        epochs[a], epochs[b] = start[i], end[j]
        params = link_parameters(shown.candidate, view.case)
        return replace(
            view,
            seq=shown.candidate.sequence,
            at=tuple(str(jd_tdb_to_utc(float(jd), digits=3)) for jd in epochs),
            arcs=None,
            res=params.get("res"),
        )

    # -- leg maps --------------------------------------------------------------------------
    def leg_map(self, view: SequenceView, candidate: Candidate) -> LegMap:
        """The leg map of a view's leg around a candidate (kept in a small LRU)."""
        check_leg_map_size(view.span_days, view.step_days)
        sequence_case = self.sequence_case(view)
        model = self.model(sequence_case, candidate.sequence)
        k = view.leg - 1
        if not 0 <= k < len(model.spec.legs):
            raise InputError("leg", view.leg, f"a leg from 1 to {len(model.spec.legs)}")
        key = (
            sequence_hash(sequence_case),
            candidate.sequence,
            candidate.epochs_jd_tdb,
            _angles_key(candidate),
            k,
            view.span_days,
            view.step_days,
        )
        hit = self._leg_maps.get(key)
        if hit is not None:
            return hit
        a, b = model.spec.leg_epochs(k)
        start, end = leg_axes(candidate.epochs_jd_tdb, a, b, view.span_days, view.step_days)
        result = leg_map(
            model, candidate.epochs_jd_tdb, k, start, end, angles_deg=_angles(candidate)
        )
        return self._leg_maps.put(key, result)

    def forget_leg_maps(self) -> None:
        """Drop the kept leg maps (the bench times a cold map with it)."""
        self._leg_maps = _Memo(self._leg_maps.size)

    def prewarm(self, view: SequenceView, outcome: SearchOutcome) -> Future | None:
        """Compute, in the background, the leg maps of a search's ranked candidates for the
        view's leg and span (so choosing another candidate finds its map ready); the work's
        future, or None when it was asked for before."""
        tag = f"{outcome.key}:{view.leg}:{view.span_days}:{view.step_days}"
        with self._lock:
            if tag in self._prewarmed:
                return None
            self._prewarmed.add(tag)
            if len(self._prewarmed) > 256:
                self._prewarmed.clear()
                self._prewarmed.add(tag)

        def run() -> None:
            for candidate in outcome.candidates:
                try:
                    self.leg_map(view, candidate)
                except Exception:  # a map that cannot be made is made (and reported) on demand
                    _LOG.debug("leg map prewarm failed", exc_info=True)

        return self._prewarm.submit(run)

    # -- figures ---------------------------------------------------------------------------
    def selection_figures(self, view: SequenceView, shown: Shown):
        """(arc view, encounter chart, family chart, details sections) of a view's candidate."""
        sequence_case = self.sequence_case(view)
        candidate = shown.candidate
        model = self.model(sequence_case, candidate.sequence)
        arc = sequence_figures.sequence_arc_view_figure(sequence_scene(model, candidate))
        chart = sequence_figures.encounter_chart_figure(encounter_chart_data(candidate))
        k = min(view.leg, len(candidate.legs)) - 1
        fam = leg_family_data(model, candidate, k)
        if fam is None:
            leg = candidate.legs[k]
            reason = (
                "a resonant return, flown on one orbit, not a Lambert arc"
                if leg.branch == "resonant"
                else "no arc"
            )
            from . import theme

            family = theme.empty_figure(f"Leg {leg.index} has no family chart: {reason}.")
        else:
            family = figures.family_chart_figure(fam)
        details = candidate_details(
            sequence_case,
            model,
            candidate,
            rank_text=shown.rank_text,
            provenance=self.provenance(sequence_case),
        )
        return arc, chart, family, details

    def provenance(self, sequence_case: SequenceCase) -> dict:
        key = ("provenance", sequence_hash(sequence_case))
        hit = self._cases.get(key)
        return hit if hit is not None else self._cases.put(key, sequence_provenance(sequence_case))

    def leg_map_figure(self, view: SequenceView, shown: Shown) -> go.Figure:
        sequence_case = self.sequence_case(view)
        legmap = self.leg_map(view, shown.candidate)
        k = legmap.leg
        limits = sequence_case.case.limits
        limit = {
            "c3_km2_s2": limits.c3_max_km2_s2,
            "vinf_arrival_km_s": limits.vinf_arrival_max_km_s,
        }.get(view.metric)
        spec_leg = self.model(sequence_case, shown.candidate.sequence).spec.legs[k]
        data = leg_map_data(
            legmap,
            view.metric,
            shown.candidate,
            shown.ranked if shown.retimed else None,
            limit=limit,
            tof_bounds=(spec_leg.tof_min_days, spec_leg.tof_max_days),
        )
        return sequence_figures.leg_map_figure(data)

    def leg_options(self, candidate: Candidate) -> list[dict]:
        return [
            {
                "value": leg.index,
                "label": f"leg {leg.index}: {display_name(leg.from_body)} → "
                f"{display_name(leg.to_body)}",
            }
            for leg in candidate.legs
        ]

    # -- shortlist -------------------------------------------------------------------------
    def keep(self, view: SequenceView, note: str | None, author: str | None):
        """Add the view's candidate to the shared shortlist, rebuilt here from the view, with a
        link that opens it on this page."""
        outcome = self.result(view)
        if outcome is None:
            raise InputError("candidate", "none", "a finished search")
        shown = self.shown(view, outcome)
        sequence_case = self.sequence_case(view)
        candidate = shown.candidate
        if not candidate.ok:
            raise InputError("candidate", candidate.sequence, "a candidate with an arc on each leg")
        record = candidate_record(sequence_case, candidate, case_id=view.case)
        params = link_parameters(candidate, view.case)
        keep_view = replace(
            view,
            seq=params["seq"],
            at=tuple(params["at"].split("~")),
            arcs=params.get("arcs"),
            res=params.get("res"),
        )
        slotted = [leg for leg in candidate.legs if leg.branch in ("low", "high", "single")]
        revolutions = max((leg.revolutions for leg in slotted), default=0)
        branch = next(
            (leg.branch for leg in slotted if leg.revolutions == revolutions and revolutions),
            "single",
        )

        def number(value: float) -> float | None:
            return float(value) if math.isfinite(value) else None

        metrics = {
            "c3_km2_s2": number(candidate.encounters[0].c3_km2_s2),
            "vinf_arrival_km_s": number(candidate.encounters[-1].vinf_in_km_s),
            "dv_total_km_s": number(candidate.dv_total_km_s),
            "tof_days": number(candidate.duration_days),
            "flyby_margin_km": number(worst_margin_km(candidate)),
        }
        return self.shortlist.add(
            case_id=view.case,
            case_title=sequence_case.case.title,
            case_hash=record["case_hash"],
            departure_utc=record["departure_utc"],
            arrival_utc=record["arrival_utc"],
            revolutions=int(min(revolutions, 20)),
            branch=branch,
            metrics=metrics,
            note=note,
            author=author,
            view=to_query(keep_view),
            extra={"kind": "sequence", "page": "/sequence", "record": _json_safe(record)},
        )

    # -- downloads -------------------------------------------------------------------------
    def candidates_csv(self, view: SequenceView) -> str:
        import tempfile
        from pathlib import Path

        from solver.files.sequence_export import write_candidates

        outcome = self.result(view)
        if outcome is None:
            raise InputError("candidates", "none", "a finished search")
        sequence_case = self.sequence_case(view)
        with tempfile.TemporaryDirectory(prefix="arcwindow-seq-") as folder:
            path = Path(folder) / "candidates.csv"
            write_candidates(sequence_case, outcome.candidates, path)
            return path.read_text(encoding="utf-8")

    def candidate_json(self, view: SequenceView) -> str:
        import json

        from solver.files.sequence_export import candidate_json

        shown = self._shown_now(view)
        data = candidate_json(
            self.sequence_case(view), shown.candidate, rank=None if shown.retimed else shown.rank
        )
        return json.dumps(data, indent=1, ensure_ascii=False)

    def candidate_oem(self, view: SequenceView) -> str:
        from solver.files.sequence_export import candidate_oem_text

        shown = self._shown_now(view)
        return candidate_oem_text(self.sequence_case(view), shown.candidate)

    def _shown_now(self, view: SequenceView) -> Shown:
        outcome = self.result(view)
        if outcome is None:
            raise InputError("candidate", "none", "a finished search")
        return self.shown(view, outcome)

    def shutdown(self) -> None:
        self._prewarm.shutdown(wait=False, cancel_futures=True)


def _angles(candidate: Candidate) -> list[list[float]] | None:
    angles = [
        [leg.metrics["pitch_deg"], leg.metrics["clock_deg"]]
        for leg in candidate.legs
        if leg.branch == "resonant"
    ]
    return angles or None


def _angles_key(candidate: Candidate) -> tuple:
    angles = _angles(candidate)
    return tuple(tuple(a) for a in angles) if angles else ()


def _json_safe(value: Any) -> Any:
    """Plain JSON (finite floats; NaN and infinities as None)."""
    if isinstance(value, dict):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_safe(v) for v in value]
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


__all__ = ["SearchOutcome", "SequenceService", "Shown"]
