"""Grid cache speed: put and hit of window-sized entries against plain ``np.savez``/``np.load``.

The baseline stores the same arrays with numpy's own uncompressed archive and loads every array
back; it has no checksum, no atomic rename and no fsync, so it is the floor of what a cache that
writes and reads the same bytes can cost. Ratios are baseline time / cache time (above 1 means
the cache is faster).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np

from app.bench import BenchLine, best_time_s

SEED = 20261201
N_FLOAT_ARRAYS = 24  # about the number of float64 metrics a window result carries


def window_like(n: int, slots: int) -> dict[str, np.ndarray]:
    """Seeded arrays shaped like a window result: n x n cells, ``slots`` arcs per cell."""
    rng = np.random.default_rng(SEED)
    arrays: dict[str, np.ndarray] = {
        "departure_jd_tdb": 2462000.5 + np.arange(n, dtype=float),
        "arrival_jd_tdb": 2462100.5 + np.arange(n, dtype=float),
        "reason": rng.integers(0, 10, (n, n, slots), dtype=np.int8),
    }
    for k in range(N_FLOAT_ARRAYS):
        metric = rng.standard_normal((n, n, slots))
        metric[rng.random((n, n, slots)) < 0.05] = np.nan
        arrays[f"metric_{k:02d}"] = metric
    return arrays


def _lines_for(label: str, arrays: dict[str, np.ndarray], folder: Path) -> list[BenchLine]:
    from solver.digest import cache_key
    from solver.files.cache import GridCache

    cache = GridCache(folder / "cache", max_bytes=8 * 1024**3)
    key = cache_key({"bench": label})
    size_mb = sum(a.nbytes for a in arrays.values()) / 1e6

    put_s = best_time_s(lambda: cache.put(key, arrays, {"bench": label}), repeats=3)
    hit_s = best_time_s(lambda: cache.get(key), repeats=3)

    npz = folder / "baseline.npz"
    save_s = best_time_s(lambda: np.savez(npz, **arrays), repeats=3)

    def load_all() -> None:
        with np.load(npz) as archive:
            for name in archive.files:
                archive[name]

    load_s = best_time_s(load_all, repeats=3)
    cache.clear()
    npz.unlink()
    return [
        BenchLine(
            section="cache",
            name=f"hit, {label} entry ({size_mb:,.0f} MB, {len(arrays)} arrays)",
            value=hit_s,
            unit="s",
            baseline_value=load_s,
            ratio=load_s / hit_s,
            goal="<= 0.2 s for a 200 MB entry (a cold 1000 x 1000 grid takes ~1.5 s)"
            if label == "200 MB"
            else "",
            meets_goal=(hit_s <= 0.2) if label == "200 MB" else None,
            notes="read, CRC-32 check of every byte, arrays as views; baseline np.load of .npz "
            "(warm page cache in both)",
        ),
        BenchLine(
            section="cache",
            name=f"put, {label} entry ({size_mb:,.0f} MB)",
            value=put_s,
            unit="s",
            baseline_value=save_s,
            ratio=save_s / put_s,
            notes="checksums, temporary file, fsync, atomic rename, eviction scan; baseline "
            "np.savez without fsync (disk-bound: varies with the machine's write-back)",
        ),
    ]


def run(size: str = "full") -> list[BenchLine]:
    cases = [("200 MB", 1000, 1), ("1 GB", 1000, 5)] if size == "full" else [("quick", 100, 2)]
    lines: list[BenchLine] = []
    with tempfile.TemporaryDirectory(prefix="arcwindow-cache-bench-") as folder:
        for label, n, slots in cases:
            lines.extend(_lines_for(label, window_like(n, slots), Path(folder)))
    return lines
