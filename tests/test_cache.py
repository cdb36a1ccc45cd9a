"""Grid disk cache: exact hits, misses, untrusted files, killed and concurrent writers, LRU.

The independent references here are the standard library (``hashlib.sha256``, ``json``) and
numpy's own byte views: a hit must give back the very bytes that were stored.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import multiprocessing
import os
import random
import signal
import struct
import tempfile
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import solver.files.cache as cache_module
import solver.files.gridfile as gridfile
from solver.digest import cache_key, canonical_json
from solver.errors import InputError
from solver.files.cache import DEFAULT_MAX_BYTES, GridCache

needs_fork = pytest.mark.skipif(
    "fork" not in multiprocessing.get_all_start_methods() or not hasattr(signal, "SIGKILL"),
    reason="killing and forking writers needs POSIX fork and SIGKILL",
)


# --------------------------------------------------------------------------------------------
# Helpers shared by the tests of this file


def nan_with_payload(bits: int) -> np.float64:
    """A float64 NaN with the given bit pattern (quiet or signalling, any payload)."""
    return np.array([bits], dtype="<u8").view("<f8")[0]


def grid_arrays(seed: int, n: int = 40, slots: int = 2) -> dict[str, np.ndarray]:
    """A small window-like result whose every byte follows from ``seed``."""
    rng = np.random.default_rng(seed)
    c3 = rng.uniform(5.0, 60.0, (n, n, slots))
    c3[rng.random((n, n, slots)) < 0.1] = np.nan
    return {
        "departure_jd_tdb": 2462000.5 + np.arange(n, dtype=float),
        "arrival_jd_tdb": 2462150.5 + 2.0 * np.arange(n, dtype=float),
        "c3_km2_s2": c3,
        "vinf_arrival_km_s": rng.uniform(2.0, 9.0, (n, n, slots)),
        "reason": rng.integers(0, 10, (n, n, slots), dtype=np.int8),
    }


def assert_same_bits(got: dict[str, np.ndarray], expected: dict[str, np.ndarray]) -> None:
    assert list(got) == list(expected)
    for name, want in expected.items():
        have = got[name]
        assert have.dtype == want.dtype, name
        assert have.shape == want.shape, name
        assert have.tobytes() == want.tobytes(), name
        if want.dtype.kind in "biufc":
            assert np.array_equal(have, want, equal_nan=want.dtype.kind in "fc"), name


def check_consistent_hit(hit) -> None:
    """A hit written by a test writer must equal what its recorded seed generates."""
    seed = hit.metadata["seed"]
    n = hit.metadata["n"]
    assert_same_bits(hit.arrays, grid_arrays(seed, n=n))


def temporaries(directory: Path) -> list[Path]:
    return sorted(p for p in directory.iterdir() if p.name.startswith(".") and p.suffix == ".tmp")


@pytest.fixture
def cache(tmp_path: Path) -> GridCache:
    return GridCache(tmp_path / "grids", max_bytes=1024**3)


# --------------------------------------------------------------------------------------------
# Hits and misses


def test_hit_returns_identical_arrays_bit_for_bit(cache: GridCache) -> None:
    payload_nans = np.array(
        [
            nan_with_payload(0x7FF8000000000000),  # the default quiet NaN
            nan_with_payload(0x7FF8000000000123),  # quiet NaN with a payload
            nan_with_payload(0xFFF8000000ABCDEF),  # negative quiet NaN with a payload
            nan_with_payload(0x7FF0000000000001),  # signalling NaN
            -0.0,
            np.inf,
            5e-324,  # smallest subnormal
        ]
    )
    base = np.arange(24, dtype=float).reshape(4, 6)
    arrays = {
        **grid_arrays(7),
        "nan_payloads": payload_nans,
        "big_endian_km": np.arange(5, dtype=">f8") * 1.5e8,
        "float32": np.linspace(0, 1, 7, dtype=np.float32),
        "within_limits": np.array([[True, False], [False, True]]),
        "fortran_order": np.asfortranarray(base),
        "strided_view": base[::2, ::3],
        "scalar": np.array(3.25),
        "empty": np.empty((0, 3)),
        "epochs": np.array(["2031-05-01T00:00", "2031-05-02T12:00"], dtype="datetime64[s]"),
        "labels": np.array(["low", "high"], dtype="<U4"),
    }
    metadata = {
        "ephemeris": "DE423",
        "constants_source": "solver.constants",
        "engine_version": "0.1.0",
        "case_hash": "ab" * 32,
        "grid_shape": (40, 40, 2),
        "mu_sun_km3_s2": np.float64(1.32712440018e11),
    }
    key = cache_key({"case": {"name": "demo"}, "ephemeris": "DE423", "engine": "0.1.0"})
    path = cache.put(key, arrays, metadata)
    assert path == cache.path_for(key) and path.is_file()

    hit = cache.get(key)
    assert hit is not None
    assert hit.key == key and hit.path == path and hit.size_bytes == path.stat().st_size
    expected = {name: np.ascontiguousarray(a) if a.ndim else a for name, a in arrays.items()}
    assert_same_bits(hit.arrays, expected)
    for array in hit.arrays.values():
        assert array.flags.c_contiguous and array.flags.writeable
    # JSON round trip: the tuple comes back as a list, the numpy scalar as a float.
    assert hit.metadata == {
        **metadata,
        "grid_shape": [40, 40, 2],
        "mu_sun_km3_s2": 1.32712440018e11,
    }

    # Changing what a hit returned never changes the stored entry.
    hit.arrays["c3_km2_s2"][...] = 0.0
    assert_same_bits(cache.get(key).arrays, expected)
    assert temporaries(cache.directory) == []


def test_miss_on_another_key_and_on_a_missing_folder(tmp_path: Path) -> None:
    missing = GridCache(tmp_path / "not-yet-created")
    assert missing.get(cache_key({"a": 1})) is None
    assert missing.entries() == [] and missing.total_bytes() == 0 and missing.clear() == 0
    assert not (tmp_path / "not-yet-created").exists()  # reading never creates the folder

    cache = GridCache(tmp_path / "grids")
    cache.put(cache_key({"a": 1}), grid_arrays(1), {})
    assert cache.get(cache_key({"a": 2})) is None
    assert cache.get(cache_key({"a": 1})) is not None


def test_an_entry_path_that_is_a_folder_is_a_miss(cache: GridCache) -> None:
    key = cache_key({"a": 1})
    cache.path_for(key).mkdir(parents=True)
    assert cache.get(key) is None


# --------------------------------------------------------------------------------------------
# Keys


def test_cache_key_is_sha256_of_the_documented_canonical_json() -> None:
    payload = {
        "engine_version": "0.1.0",
        "ephemeris": "DE423",
        "case": {"tof_days": (100, 400.5), "c3_max_km2_s2": np.float64(0.1 + 0.2), "ok": True},
    }
    text = (
        '{"case":{"c3_max_km2_s2":0.30000000000000004,"ok":true,"tof_days":[100,400.5]},'
        '"engine_version":"0.1.0","ephemeris":"DE423"}'
    )
    assert canonical_json(payload) == text
    # Independent recomputation with hashlib (the key's documented definition).
    expected = hashlib.sha256(("arcwindow.cache_key.v1\n" + text).encode("ascii")).hexdigest()
    assert cache_key(payload) == expected
    assert len(expected) == 64


@pytest.mark.parametrize(
    ("left", "right"),
    [
        ({"a": 1, "b": 2}, {"b": 2, "a": 1}),  # key order
        ({"a": (1, 2)}, {"a": [1, 2]}),  # tuple and list
        ({"a": np.int64(3)}, {"a": 3}),  # numpy integer scalar
        ({"a": np.float64(0.25)}, {"a": 0.25}),  # numpy float scalar
        ({"a": np.array([[1.5, 2.0]])}, {"a": [[1.5, 2.0]]}),  # array as nested list
        ({"a": np.array([1.5, 2.0], dtype=">f8")}, {"a": [1.5, 2.0]}),  # byte order ignored
        ({"a": np.bool_(True)}, {"a": True}),
        ({"a": Path("/data/de423.bsp")}, {"a": os.fspath(Path("/data/de423.bsp"))}),
    ],
)
def test_cache_key_equal_for_equal_values(left: dict, right: dict) -> None:
    assert cache_key(left) == cache_key(right)


@pytest.mark.parametrize(
    ("left", "right"),
    [
        ({"a": 0.1 + 0.2}, {"a": 0.3}),  # repr keeps every bit of a double
        ({"a": 0.0}, {"a": -0.0}),
        ({"a": 1}, {"a": 1.0}),  # int and float are different inputs
        ({"a": "1"}, {"a": 1}),
        ({"a": [1, 2]}, {"a": [2, 1]}),
        ({"engine": "0.1.0"}, {"engine": "0.1.1"}),
        ({"a": float("nan")}, {"a": None}),
    ],
)
def test_cache_key_differs_for_different_values(left: dict, right: dict) -> None:
    assert cache_key(left) != cache_key(right)


@pytest.mark.parametrize(
    ("payload", "field"),
    [
        ({"a": {1, 2}}, "payload['a']"),
        ({"a": {1: "x"}}, "payload['a'] key"),
        ({"a": [object()]}, "payload['a'][0]"),
        ({"a": np.array([1 + 2j])}, "payload['a']"),
        ([1, 2], "payload"),
    ],
)
def test_cache_key_rejects_values_without_a_canonical_form(payload, field: str) -> None:
    with pytest.raises(InputError) as info:
        cache_key(payload)
    assert info.value.field == field


# --------------------------------------------------------------------------------------------
# Files that must not be trusted


def _entry_regions(data: bytes) -> dict[str, int]:
    """Offsets of the parts of a version-1 entry, read from its preamble (for test targeting)."""
    header_len = struct.unpack_from("<I", data, 12)[0]
    header = json.loads(data[24 : 24 + header_len])
    data_offset = -(-(24 + header_len) // 4096) * 4096
    first = header["arrays"][0]
    return {
        "header_end": 24 + header_len,
        "data_offset": data_offset,
        "first_array_end": data_offset + first["offset"] + first["nbytes"],
    }


def test_every_single_flipped_byte_is_caught(tmp_path: Path) -> None:
    cache = GridCache(tmp_path)
    key = cache_key({"flip": 1})
    small = {"a_km": np.arange(5.0), "b": np.arange(3, dtype=np.int8), "c": np.ones((2, 2))}
    path = cache.put(key, small, {"note": "tiny entry so every byte can be tried"})
    good = path.read_bytes()
    regions = _entry_regions(good)
    assert regions["first_array_end"] < len(good)  # padding between arrays exists to be tested
    version_bytes = range(8, 12)
    for position in range(len(good)):
        damaged = bytearray(good)
        damaged[position] ^= 0xFF
        path.write_bytes(bytes(damaged))
        assert cache.get(key) is None, f"flipped byte at {position} went unnoticed"
        # A file from another format version is left for that version; all else is removed.
        assert path.exists() == (position in version_bytes), position
    path.write_bytes(good)
    assert_same_bits(cache.get(key).arrays, small)


@pytest.mark.parametrize(
    "damage",
    [
        "empty",
        "cut_in_preamble",
        "cut_in_header",
        "cut_in_header_padding",
        "cut_in_data",
        "one_byte_short",
        "one_byte_extra",
        "foreign_text",
        "foreign_npy",
        "random_bytes",
        "wrong_key",
    ],
)
def test_damaged_or_foreign_file_is_a_miss_then_put_works(tmp_path: Path, damage: str) -> None:
    cache = GridCache(tmp_path)
    key = cache_key({"case": "damaged"})
    other_key = cache_key({"case": "other"})
    arrays = grid_arrays(3)
    path = cache.put(key, arrays, {"seed": 3})
    good = path.read_bytes()
    regions = _entry_regions(good)
    if damage == "empty":
        bad = b""
    elif damage == "cut_in_preamble":
        bad = good[:10]
    elif damage == "cut_in_header":
        bad = good[: regions["header_end"] - 5]
    elif damage == "cut_in_header_padding":
        bad = good[: regions["data_offset"] - 1]
    elif damage == "cut_in_data":
        bad = good[: (regions["data_offset"] + len(good)) // 2]
    elif damage == "one_byte_short":
        bad = good[:-1]
    elif damage == "one_byte_extra":
        bad = good + b"\0"
    elif damage == "foreign_text":
        bad = b"departure,arrival,c3\n2031-05-01,2031-11-01,12.5\n"
    elif damage == "foreign_npy":
        buffer = tempfile.SpooledTemporaryFile()
        np.save(buffer, arrays["c3_km2_s2"])
        buffer.seek(0)
        bad = buffer.read()
    elif damage == "random_bytes":
        bad = np.random.default_rng(5).bytes(len(good))
    elif damage == "wrong_key":
        # A complete, valid entry, but stored for another key (renamed or copied by hand).
        bad = cache.put(other_key, arrays, {"seed": 3}).read_bytes()
    path.write_bytes(bad)

    assert cache.get(key) is None
    assert not path.exists()  # an untrusted file is removed, not left to fail again
    assert cache.put(key, arrays, {"seed": 3}) == path
    assert_same_bits(cache.get(key).arrays, arrays)


def test_file_from_another_format_version_is_ignored_then_replaced(tmp_path: Path) -> None:
    cache = GridCache(tmp_path)
    key = cache_key({"v": 2})
    path = cache.put(key, grid_arrays(1), {})
    data = bytearray(path.read_bytes())
    struct.pack_into("<I", data, 8, gridfile.FORMAT_VERSION + 1)
    path.write_bytes(bytes(data))
    assert cache.get(key) is None
    assert path.exists()  # not ours to delete: its own version may read it
    cache.put(key, grid_arrays(2), {})
    assert_same_bits(cache.get(key).arrays, grid_arrays(2))


# --------------------------------------------------------------------------------------------
# Killed and concurrent writers (separate processes)


def _child_put_then_hang(directory: str, key: str, seed: int, halfway) -> None:
    """Start writing a large entry, signal once half of the first big array is out, then hang."""
    real_write_all = gridfile._write_all

    def slow_write_all(fd: int, data: memoryview) -> None:
        if data.nbytes >= 100_000:  # the first array's bytes, not the header
            real_write_all(fd, data[: data.nbytes // 2])
            halfway.set()
            time.sleep(120)  # the parent kills us here
        real_write_all(fd, data)

    gridfile._write_all = slow_write_all
    GridCache(directory).put(key, grid_arrays(seed, n=200), {"seed": seed, "n": 200})


def _child_put_forever(directory: str, key: str, n: int) -> None:
    cache = GridCache(directory)
    for seed in itertools.count():
        cache.put(key, grid_arrays(seed, n=n), {"seed": seed, "n": n})


def _child_put_many(directory: str, max_bytes: int, writer: int, keys: list[str]) -> None:
    cache = GridCache(directory, max_bytes=max_bytes)
    for round_ in range(6):
        for key in keys:
            seed = 1000 * writer + round_
            cache.put(key, grid_arrays(seed, n=60), {"seed": seed, "n": 60, "key": key})


@needs_fork
def test_writer_killed_mid_write_leaves_nothing_trusted(tmp_path: Path) -> None:
    ctx = multiprocessing.get_context("fork")
    cache = GridCache(tmp_path)
    key = cache_key({"case": "killed"})
    cache.put(key, grid_arrays(1, n=200), {"seed": 1, "n": 200})  # an older, complete entry

    halfway = ctx.Event()
    child = ctx.Process(target=_child_put_then_hang, args=(str(tmp_path), key, 2, halfway))
    child.start()
    deadline = time.monotonic() + 60
    while not halfway.wait(0.1):
        assert child.is_alive() and time.monotonic() < deadline, "the writer never got halfway"
    os.kill(child.pid, signal.SIGKILL)
    child.join(30)
    assert child.exitcode == -signal.SIGKILL

    leftovers = temporaries(tmp_path)
    assert len(leftovers) == 1  # the partial file exists, under a name no reader opens
    check_consistent_hit(cache.get(key))  # still the older complete entry, untouched
    assert [entry.key for entry in cache.entries()] == [key]
    assert cache.total_bytes() == cache.path_for(key).stat().st_size

    # A young temporary may belong to a live writer: eviction leaves it alone...
    cache.put(cache_key({"case": "another"}), grid_arrays(3), {"seed": 3, "n": 40})
    assert temporaries(tmp_path) == leftovers
    # ...and once stale, the next eviction sweeps it away.
    two_hours_ago = time.time() - 7200
    os.utime(leftovers[0], (two_hours_ago, two_hours_ago))
    cache.put(cache_key({"case": "a third"}), grid_arrays(4), {"seed": 4, "n": 40})
    assert temporaries(tmp_path) == []


@needs_fork
def test_writer_killed_at_random_moments_never_leaves_a_bad_hit(tmp_path: Path) -> None:
    ctx = multiprocessing.get_context("fork")
    cache = GridCache(tmp_path)
    key = cache_key({"case": "random kill"})
    clock = random.Random(20310501)
    hits = 0
    for _ in range(6):
        child = ctx.Process(target=_child_put_forever, args=(str(tmp_path), key, 160))
        child.start()
        time.sleep(clock.uniform(0.05, 0.5))
        os.kill(child.pid, signal.SIGKILL)
        child.join(30)
        hit = cache.get(key)
        if hit is not None:
            check_consistent_hit(hit)
            hits += 1
    # With a few hundred milliseconds per round, complete entries are written most rounds.
    assert hits >= 1


@needs_fork
def test_concurrent_writers_same_and_different_keys(tmp_path: Path) -> None:
    ctx = multiprocessing.get_context("fork")
    keys = [cache_key({"case": i}) for i in range(3)]
    entry_bytes = (
        GridCache(tmp_path / "probe").put("probe", grid_arrays(0, n=60), {}).stat().st_size
    )
    max_bytes = 2 * entry_bytes + entry_bytes // 2  # room for two entries: eviction runs constantly
    writers = [
        ctx.Process(target=_child_put_many, args=(str(tmp_path), max_bytes, w, keys))
        for w in range(4)
    ]
    for writer in writers:
        writer.start()
    reader = GridCache(tmp_path, max_bytes=max_bytes)
    reads = 0
    while any(writer.is_alive() for writer in writers):
        for key in keys:
            hit = reader.get(key)  # must be a miss or a whole, correct entry, never an error
            if hit is not None:
                assert hit.metadata["key"] == key
                check_consistent_hit(hit)
                reads += 1
    for writer in writers:
        writer.join(60)
        assert writer.exitcode == 0
    for key in keys:
        hit = reader.get(key)
        if hit is not None:
            check_consistent_hit(hit)
    assert reader.total_bytes() <= max_bytes + entry_bytes  # a racing writer may keep its own
    assert temporaries(tmp_path) == []


# --------------------------------------------------------------------------------------------
# LRU eviction


def test_lru_eviction_order_under_a_small_cap(tmp_path: Path) -> None:
    arrays = grid_arrays(1)
    probe = GridCache(tmp_path / "probe").put("probe", arrays, {})
    entry_bytes = probe.stat().st_size
    cache = GridCache(tmp_path / "lru", max_bytes=3 * entry_bytes)
    a, b, c, d, e = (cache_key({"entry": name}) for name in "abcde")
    for key in (a, b, c):
        cache.put(key, arrays, {})
    assert cache.total_bytes() == 3 * entry_bytes
    assert cache.get(a) is not None  # a is now the most recently used
    cache.put(d, arrays, {})  # over the cap by one entry: the least recently used (b) goes
    assert {entry.key for entry in cache.entries()} == {a, c, d}
    assert cache.get(b) is None
    cache.put(e, arrays, {})  # next least recently used is c
    assert [entry.key for entry in cache.entries()] == [e, d, a]
    assert cache.total_bytes() <= cache.max_bytes


def test_the_entry_just_written_is_never_evicted(tmp_path: Path) -> None:
    cache = GridCache(tmp_path, max_bytes=1000)  # smaller than any entry
    first, second = cache_key({"n": 1}), cache_key({"n": 2})
    cache.put(first, grid_arrays(1), {})
    assert cache.get(first) is not None
    cache.put(second, grid_arrays(2), {})
    assert [entry.key for entry in cache.entries()] == [second]


def test_clear_and_eviction_leave_other_files_alone(tmp_path: Path) -> None:
    notes = tmp_path / "notes.txt"
    notes.write_text("not a cache file\n")
    lookalike = tmp_path / "not a key!.awgrid"
    lookalike.write_bytes(b"x")
    cache = GridCache(tmp_path, max_bytes=1)
    cache.put(cache_key({"x": 1}), grid_arrays(1), {})
    cache.put(cache_key({"x": 2}), grid_arrays(2), {})
    assert cache.clear() == 1
    assert notes.exists() and lookalike.exists()
    assert cache.entries() == []


def test_entries_list_key_size_and_last_use(cache: GridCache) -> None:
    first, second = cache_key({"n": 1}), cache_key({"n": 2})
    cache.put(first, grid_arrays(1), {})
    cache.put(second, grid_arrays(2, n=10), {})
    cache.get(first)
    listed = cache.entries()
    assert [entry.key for entry in listed] == [first, second]
    for entry in listed:
        assert entry.size_bytes == entry.path.stat().st_size
        assert entry.last_used_utc.tzinfo is not None
        assert abs(entry.last_used_utc.timestamp() - time.time()) < 600
    assert cache.total_bytes() == sum(entry.size_bytes for entry in listed)
    assert cache.remove(second) and not cache.remove(second)


# --------------------------------------------------------------------------------------------
# Configuration: argument, then environment variable, then default


def test_folder_and_cap_precedence(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv(cache_module.ENV_DIRECTORY, raising=False)
    monkeypatch.delenv(cache_module.ENV_MAX_BYTES, raising=False)
    import platformdirs

    default = GridCache()
    assert default.directory == Path(platformdirs.user_cache_dir("arcwindow")) / "grids"
    assert default.max_bytes == DEFAULT_MAX_BYTES == 4 * 1024**3

    monkeypatch.setenv(cache_module.ENV_DIRECTORY, str(tmp_path / "from-env"))
    monkeypatch.setenv(cache_module.ENV_MAX_BYTES, "500MiB")
    from_env = GridCache()
    assert from_env.directory == tmp_path / "from-env"
    assert from_env.max_bytes == 500 * 1024**2

    explicit = GridCache(tmp_path / "from-arg", max_bytes=123)
    assert explicit.directory == tmp_path / "from-arg"
    assert explicit.max_bytes == 123


@pytest.mark.parametrize(
    ("text", "expected"),
    [("4294967296", 4 * 1024**3), ("4GiB", 4 * 1024**3), ("500MB", 500 * 10**6), ("0", 0)],
)
def test_cap_from_the_environment(monkeypatch: pytest.MonkeyPatch, text: str, expected: int):
    monkeypatch.setenv(cache_module.ENV_MAX_BYTES, text)
    assert GridCache("unused").max_bytes == expected


@pytest.mark.parametrize("text", ["lots", "-5", "4 GiBs", "1.5GB"])
def test_bad_cap_in_the_environment_names_the_variable(
    monkeypatch: pytest.MonkeyPatch, text: str
) -> None:
    monkeypatch.setenv(cache_module.ENV_MAX_BYTES, text)
    with pytest.raises(InputError) as info:
        GridCache("unused")
    assert info.value.field == "ARCWINDOW_CACHE_MAX_BYTES"
    assert "ARCWINDOW_CACHE_MAX_BYTES" in str(info.value)


@pytest.mark.parametrize("max_bytes", [-1, 2.5, True])
def test_bad_cap_argument(max_bytes) -> None:
    with pytest.raises(InputError, match="max_bytes"):
        GridCache("unused", max_bytes=max_bytes)


# --------------------------------------------------------------------------------------------
# What put refuses


@pytest.mark.parametrize(
    ("key", "arrays", "metadata", "field"),
    [
        ("../escape", {"a": np.zeros(2)}, {}, "key"),
        ("", {"a": np.zeros(2)}, {}, "key"),
        ("k", {"a": np.array([None, 1])}, {}, "arrays['a'].dtype"),
        ("k", {"": np.zeros(2)}, {}, "arrays key"),
        ("k", {"a": np.zeros(2)}, {"when": object()}, "metadata"),
        ("k", [np.zeros(2)], {}, "arrays"),
    ],
)
def test_put_rejects_what_it_cannot_store(
    cache: GridCache, key: str, arrays, metadata, field: str
) -> None:
    with pytest.raises(InputError) as info:
        cache.put(key, arrays, metadata)
    assert info.value.field == field
    assert not cache.directory.exists() or list(cache.directory.iterdir()) == []


# --------------------------------------------------------------------------------------------
# Property: any dict of arrays round-trips bit for bit

_DTYPES = [
    "<f8",
    ">f8",
    "<f4",
    "<f2",
    "<c16",
    "<i8",
    ">i4",
    "|i1",
    "|u1",
    "<u2",
    "|b1",
    "<M8[s]",
    "<m8[ms]",
    "<U3",
    "|S5",
    [("tof_s", "<f8"), ("rev", "|i1"), ("label", "<U2")],
]


@st.composite
def array_dicts(draw) -> dict[str, np.ndarray]:
    names = draw(st.lists(st.text(min_size=1, max_size=12), min_size=0, max_size=5, unique=True))
    out = {}
    for name in names:
        dtype = np.dtype(draw(st.sampled_from(_DTYPES)))
        shape = draw(hnp.array_shapes(min_dims=0, max_dims=3, min_side=0, max_side=5))
        nbytes = int(np.prod(shape)) * dtype.itemsize
        # Raw random bytes: every bit pattern (NaN payloads, odd bools) must survive.
        raw = draw(st.binary(min_size=nbytes, max_size=nbytes))
        array = np.frombuffer(raw, dtype=dtype).reshape(shape)
        out[name] = array.T if draw(st.booleans()) else array
    return out


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(arrays=array_dicts(), note=st.text(max_size=20))
def test_any_dict_of_arrays_round_trips_bit_for_bit(arrays, note: str) -> None:
    with tempfile.TemporaryDirectory() as directory:
        cache = GridCache(directory)
        key = cache_key({"note": note})
        cache.put(key, arrays, {"note": note})
        hit = cache.get(key)
        assert hit is not None and hit.metadata == {"note": note}
        assert list(hit.arrays) == list(arrays)
        for name, array in arrays.items():
            got = hit.arrays[name]
            assert got.dtype == array.dtype and got.shape == array.shape
            assert got.tobytes() == array.tobytes()
