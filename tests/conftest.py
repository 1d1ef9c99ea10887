"""Helpers shared by the test modules."""

from __future__ import annotations

import struct
from pathlib import Path

#: The eight-byte PNG file signature (common practice: the PNG specification, ISO/IEC 15948).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def assert_valid_png(path: str | Path, *, min_side: int = 200, max_side: int = 6000) -> tuple[int, int]:
    """Check that ``path`` holds a whole PNG image of a sane size; return (width, height) in pixels.

    Source: common practice — the PNG specification (ISO/IEC 15948): the
    signature, then an IHDR chunk whose data start with width and height as
    big-endian 32-bit integers, and an IEND chunk closing the file.
    """
    data = Path(path).read_bytes()
    assert data[:8] == PNG_SIGNATURE, f"{path} does not start with the PNG signature"
    assert data[12:16] == b"IHDR", f"{path} has no IHDR chunk first"
    width, height = struct.unpack(">II", data[16:24])
    assert min_side <= width <= max_side and min_side <= height <= max_side, (width, height)
    assert data[-8:-4] == b"IEND", f"{path} does not end with an IEND chunk"
    # A figure with axes, text and curves compresses to several kilobytes, not a blank canvas.
    assert len(data) > 5_000, f"{path} is only {len(data)} bytes"
    return width, height
