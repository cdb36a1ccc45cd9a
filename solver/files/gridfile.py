"""The grid file format: named numpy arrays plus JSON metadata in one verified file.

Used by :mod:`solver.files.cache`; knows nothing of folders, keys' meaning or eviction.

File format (version 1)
-----------------------
All integers little-endian. Offsets in bytes.

======  ===========  ==========================================================================
offset  size         content
======  ===========  ==========================================================================
0       8            magic ``b"\\x89AWGRID\\n"`` (the high byte and the newline catch text-mode
                     transfers)
8       4            format version (uint32), currently 1
12      4            header length ``H`` (uint32)
16      4            CRC-32 of the header bytes (uint32)
20      4            reserved, zero
24      H            header: UTF-8 JSON (see below)
24+H    to ``D``     zero padding; ``D`` = 24 + H rounded up to a multiple of 4096
D       ...          data region: each array's C-order bytes at ``D + offset``, offsets multiples
                     of 64, consecutive arrays separated only by zero padding; the file ends
                     exactly at the end of the last array
======  ===========  ==========================================================================

The header object holds ``format`` (``"arcwindow grid cache"``), ``key``, ``created_utc``,
``crc_block_bytes`` and ``metadata`` (the caller's JSON-able dict), and ``arrays``: a list, in the
caller's order, of ``{"name", "dtype" (numpy descr, as in ``.npy`` files), "shape", "offset",
"nbytes", "crc32" (one CRC-32 per ``crc_block_bytes`` block of that array's bytes)}``.

Why CRC-32: it is for integrity, not security. Measured on the development machine over 200 MB
(zlib 1.2.13): ``zlib.crc32`` 4.1 GB/s, ``zlib.adler32`` 3.5 GB/s, ``hashlib.blake2b`` 0.9 GB/s,
``sha256`` 1.8 GB/s; CRC-32 is the fastest and detects more error patterns than Adler-32 (which
is weak on short and low-entropy data). Blocks let several threads checksum at once, since zlib
releases the GIL (6.5 GB/s with two threads on an idle machine).
"""

from __future__ import annotations

import json
import math
import os
import struct
import zlib
from collections.abc import Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import numpy as np
from numpy.lib import format as npy_format

from solver.errors import InputError

FORMAT_VERSION = 1
_MAGIC = b"\x89AWGRID\n"
_PREAMBLE = struct.Struct("<8sIIII")  # magic, version, header length, header CRC-32, reserved
_FORMAT_NAME = "arcwindow grid cache"
_DATA_ALIGN = 4096  # data region starts on a page boundary (room for mmap readers later)
_ARRAY_ALIGN = 64  # each array starts on a cache-line boundary (SIMD-friendly views)
_CRC_BLOCK_BYTES = 16 * 1024**2
_WRITE_CHUNK_BYTES = 8 * 1024**2  # many moderate writes flush more smoothly than one huge one
_MAX_HEADER_BYTES = 64 * 1024**2
_PARALLEL_CRC_MIN_BYTES = 32 * 1024**2  # below this a thread pool costs more than it saves


class DamagedGridFile(Exception):
    """A grid file that must not be trusted; the message says why."""


def _json_default(value: Any) -> Any:
    """Let metadata carry numpy scalars and arrays; everything else must already be JSON."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    raise TypeError(f"{type(value).__name__} is not JSON serializable")


@dataclass(frozen=True)
class EncodedGrid:
    """A grid laid out for writing: header bytes, data offset and the array bytes to follow."""

    header: bytes
    data_offset: int
    pieces: list[tuple[int, memoryview]]  # (offset in data region, bytes)


def _align(value: int, alignment: int) -> int:
    return -(-value // alignment) * alignment


def encode_grid(
    key: str, arrays: Mapping[str, np.ndarray], metadata: Mapping[str, Any]
) -> EncodedGrid:
    """Validate a grid and lay it out: specs, checksums and header; no I/O.

    Parameters
    ----------
    key : str
        Key stored in the header (a reader asks for it back).
    arrays : Mapping[str, numpy.ndarray]
        Named arrays; any dtype without Python objects. Non-contiguous arrays are copied to C
        order.
    metadata : Mapping[str, Any]
        JSON-able values (numpy scalars and arrays are converted).

    Returns
    -------
    EncodedGrid

    Raises
    ------
    InputError
        If an array or the metadata cannot be stored.
    """
    if not isinstance(arrays, Mapping):
        raise InputError("arrays", type(arrays).__name__, "a mapping of names to numpy arrays")
    if not isinstance(metadata, Mapping):
        raise InputError("metadata", type(metadata).__name__, "a mapping of JSON-able values")
    specs = []
    pieces = []
    offset = 0
    for name, value in arrays.items():
        if not isinstance(name, str) or not name:
            raise InputError("arrays key", name, "non-empty strings")
        array = np.asarray(value)
        dtype = array.dtype
        if dtype.hasobject or dtype.itemsize == 0:
            raise InputError(
                f"arrays[{name!r}].dtype", str(dtype), "fixed-size dtypes without Python objects"
            )
        descr = npy_format.dtype_to_descr(dtype)
        if npy_format.descr_to_dtype(json.loads(json.dumps(descr))) != dtype:
            raise InputError(f"arrays[{name!r}].dtype", str(dtype), "dtypes with a .npy descr")
        if not array.flags.c_contiguous:
            array = array.copy(order="C")
        raw = array.reshape(-1).view(np.uint8).data
        offset = _align(offset, _ARRAY_ALIGN)
        pieces.append((offset, raw))
        specs.append(
            {
                "name": name,
                "dtype": descr,
                "shape": list(array.shape),
                "offset": offset,
                "nbytes": raw.nbytes,
            }
        )
        offset += raw.nbytes
    crcs = _crc32_blocks([raw for _, raw in pieces])
    for spec, array_crcs in zip(specs, crcs, strict=True):
        spec["crc32"] = array_crcs
    header_obj = {
        "format": _FORMAT_NAME,
        "key": key,
        "created_utc": datetime.now(UTC).isoformat(timespec="microseconds"),
        "crc_block_bytes": _CRC_BLOCK_BYTES,
        "arrays": specs,
        "metadata": metadata,
    }
    try:
        header = json.dumps(header_obj, default=_json_default, allow_nan=True).encode("utf-8")
    except (TypeError, ValueError) as exc:
        raise InputError("metadata", type(metadata).__name__, f"JSON-able values ({exc})") from None
    if len(header) > _MAX_HEADER_BYTES:
        raise InputError("metadata", f"{len(header)} bytes of JSON", f"<= {_MAX_HEADER_BYTES}")
    data_offset = _align(_PREAMBLE.size + len(header), _DATA_ALIGN)
    return EncodedGrid(header, data_offset, pieces)


def _crc32_blocks(buffers: list[memoryview], block: int = _CRC_BLOCK_BYTES) -> list[list[int]]:
    """CRC-32 of each ``block``-byte block of each buffer, on several threads if large."""
    jobs = []
    for index, buf in enumerate(buffers):
        for start in range(0, buf.nbytes, block):
            jobs.append((index, buf[start : start + block]))
    total = sum(buf.nbytes for buf in buffers)
    workers = min(4, os.cpu_count() or 1)
    if total >= _PARALLEL_CRC_MIN_BYTES and workers > 1:
        # A pool per call, never a module-level one: a forked child must not inherit dead threads.
        with ThreadPoolExecutor(max_workers=workers) as pool:
            values = list(pool.map(zlib.crc32, [view for _, view in jobs]))
    else:
        values = [zlib.crc32(view) for _, view in jobs]
    out: list[list[int]] = [[] for _ in buffers]
    for (index, _), value in zip(jobs, values, strict=True):
        out[index].append(value)
    return out


def _write_all(fd: int, data: memoryview) -> None:
    """Write every byte (os.write may write fewer than asked), in moderate chunks."""
    position = 0
    while position < data.nbytes:
        end = min(position + _WRITE_CHUNK_BYTES, data.nbytes)
        position += os.write(fd, data[position:end])


def write_grid(fd: int, encoded: EncodedGrid) -> None:
    """Write an encoded grid to an open file descriptor, from its current position (no fsync)."""
    header = encoded.header
    preamble = _PREAMBLE.pack(_MAGIC, FORMAT_VERSION, len(header), zlib.crc32(header), 0)
    head = preamble + header
    _write_all(fd, memoryview(head + bytes(encoded.data_offset - len(head))))
    written = 0
    for offset, raw in encoded.pieces:
        if offset > written:
            _write_all(fd, memoryview(bytes(offset - written)))
        _write_all(fd, raw)
        written = offset + raw.nbytes


# --------------------------------------------------------------------------------------------
# Reading


class UnknownFormatVersion(Exception):
    """Written by a newer format: leave it for that version, treat it as a miss here."""


def _read_exact(handle: Any, size: int) -> bytes:
    data = handle.read(size)
    if data is None or len(data) != size:
        raise DamagedGridFile(f"file ends early (wanted {size} bytes)")
    return data


def _readinto_exact(handle: Any, target: memoryview) -> None:
    position = 0
    while position < target.nbytes:
        count = handle.readinto(target[position:])  # one call may return less (2 GiB cap)
        if not count:
            raise DamagedGridFile(f"file ends early ({position} of {target.nbytes} data bytes)")
        position += count


def _aligned_empty(nbytes: int) -> np.ndarray:
    raw = np.empty(nbytes + _ARRAY_ALIGN, dtype=np.uint8)
    shift = (-raw.ctypes.data) % _ARRAY_ALIGN
    return raw[shift : shift + nbytes]


def read_grid(handle: Any, file_size: int, key: str) -> tuple[dict[str, np.ndarray], dict]:
    """Read and verify a grid file from its start.

    Parameters
    ----------
    handle : binary file opened unbuffered (``open(path, "rb", buffering=0)``)
        Positioned at the start of the file.
    file_size : int
        Size of the open file, bytes (from ``os.fstat``).
    key : str
        The key the caller asked for; a file stored under another key is rejected.

    Returns
    -------
    arrays : dict[str, numpy.ndarray]
        C-contiguous, writable, 64-byte-aligned views into one buffer, in the stored order.
    metadata : dict
        The stored metadata.

    Raises
    ------
    DamagedGridFile
        On any mismatch: magic, header checksum, key, specs, size, padding, data checksum.
    UnknownFormatVersion
        If another format version wrote the file.
    """
    magic, version, header_len, header_crc, reserved = _PREAMBLE.unpack(
        _read_exact(handle, _PREAMBLE.size)
    )
    if magic != _MAGIC:
        raise DamagedGridFile("not a grid cache file (magic)")
    if reserved != 0:
        raise DamagedGridFile("reserved preamble field is not zero")
    if version != FORMAT_VERSION:
        raise UnknownFormatVersion(f"format version {version}, this reader knows {FORMAT_VERSION}")
    if header_len > min(_MAX_HEADER_BYTES, file_size - _PREAMBLE.size):
        raise DamagedGridFile(f"header length {header_len} does not fit a {file_size}-byte file")
    header_bytes = _read_exact(handle, header_len)
    if zlib.crc32(header_bytes) != header_crc:
        raise DamagedGridFile("header checksum mismatch")
    header = json.loads(header_bytes.decode("utf-8"))
    if header.get("format") != _FORMAT_NAME:
        raise DamagedGridFile(f"format name {header.get('format')!r}")
    if header.get("key") != key:
        raise DamagedGridFile(f"stored for key {header.get('key')!r}")
    block = header["crc_block_bytes"]
    if not isinstance(block, int) or block <= 0:
        raise DamagedGridFile(f"crc block size {block!r}")
    metadata = header["metadata"]
    if not isinstance(metadata, dict):
        raise DamagedGridFile("metadata is not an object")

    specs = []
    end = 0
    for spec in header["arrays"]:
        name = spec["name"]
        if not isinstance(name, str):
            raise DamagedGridFile(f"array name {name!r}")
        dtype = npy_format.descr_to_dtype(spec["dtype"])
        if dtype.hasobject:
            raise DamagedGridFile(f"array {name!r} has an object dtype")
        shape = tuple(int(n) for n in spec["shape"])
        offset, nbytes = int(spec["offset"]), int(spec["nbytes"])
        if any(n < 0 for n in shape) or nbytes != math.prod(shape) * dtype.itemsize:
            raise DamagedGridFile(f"array {name!r}: shape {shape} does not match {nbytes} bytes")
        if offset != _align(end, _ARRAY_ALIGN):
            raise DamagedGridFile(f"array {name!r} at offset {offset}, expected {_align(end, 64)}")
        crcs = [int(c) for c in spec["crc32"]]
        if len(crcs) != -(-nbytes // block):
            raise DamagedGridFile(f"array {name!r}: {len(crcs)} checksums for {nbytes} bytes")
        specs.append((name, dtype, shape, offset, nbytes, crcs))
        end = offset + nbytes
    if len({spec[0] for spec in specs}) != len(specs):
        raise DamagedGridFile("repeated array name")

    data_offset = _align(_PREAMBLE.size + header_len, _DATA_ALIGN)
    if file_size != data_offset + end:
        raise DamagedGridFile(f"file has {file_size} bytes, header describes {data_offset + end}")
    padding = _read_exact(handle, data_offset - _PREAMBLE.size - header_len)
    if padding.count(0) != len(padding):
        raise DamagedGridFile("non-zero padding after the header")

    buffer = _aligned_empty(end)
    _readinto_exact(handle, buffer.data)
    if handle.read(1):
        raise DamagedGridFile("file grew while being read")
    views = [buffer[offset : offset + nbytes].data for _, _, _, offset, nbytes, _ in specs]
    for (name, *_, crcs), actual in zip(specs, _crc32_blocks(views, block), strict=True):
        if actual != crcs:
            raise DamagedGridFile(f"array {name!r}: data checksum mismatch")
    previous_end = 0
    for _, _, _, offset, nbytes, _ in specs:
        if buffer[previous_end:offset].any():
            raise DamagedGridFile("non-zero padding between arrays")
        previous_end = offset + nbytes

    arrays = {
        name: buffer[offset : offset + nbytes].view(dtype).reshape(shape)
        for name, dtype, shape, offset, nbytes, _ in specs
    }
    return arrays, metadata


__all__ = [
    "FORMAT_VERSION",
    "DamagedGridFile",
    "EncodedGrid",
    "UnknownFormatVersion",
    "encode_grid",
    "read_grid",
    "write_grid",
]
