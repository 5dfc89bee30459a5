"""Repair of a run file left behind by a killed writer.

A writer killed outright (kill -9, a crash) leaves HDF5's "open for writing"
flags set in the superblock, and the library then refuses to reopen the file.
`clear_write_flags` clears them after checking the superblock's checksum
(Jenkins' lookup3, the hash HDF5 puts on its metadata)."""
from __future__ import annotations

from pathlib import Path

_M32 = 0xFFFFFFFF


def _rot(x: int, k: int) -> int:
    return ((x << k) | (x >> (32 - k))) & _M32


def lookup3(data: bytes, initval: int = 0) -> int:
    """Bob Jenkins' lookup3 hashlittle, the checksum HDF5 puts on its metadata."""
    length = len(data)
    a = b = c = (0xDEADBEEF + length + initval) & _M32
    i = 0
    while length > 12:
        a = (a + int.from_bytes(data[i:i + 4], "little")) & _M32
        b = (b + int.from_bytes(data[i + 4:i + 8], "little")) & _M32
        c = (c + int.from_bytes(data[i + 8:i + 12], "little")) & _M32
        a = ((a - c) & _M32) ^ _rot(c, 4)   # mix
        c = (c + b) & _M32
        b = ((b - a) & _M32) ^ _rot(a, 6)
        a = (a + c) & _M32
        c = ((c - b) & _M32) ^ _rot(b, 8)
        b = (b + a) & _M32
        a = ((a - c) & _M32) ^ _rot(c, 16)
        c = (c + b) & _M32
        b = ((b - a) & _M32) ^ _rot(a, 19)
        a = (a + c) & _M32
        c = ((c - b) & _M32) ^ _rot(b, 4)
        b = (b + a) & _M32
        length -= 12
        i += 12
    if length == 0:
        return c
    tail = data[i:].ljust(12, b"\0")
    a = (a + int.from_bytes(tail[0:4], "little")) & _M32
    b = (b + int.from_bytes(tail[4:8], "little")) & _M32
    c = (c + int.from_bytes(tail[8:12], "little")) & _M32
    c = ((c ^ b) - _rot(b, 14)) & _M32   # final
    a = ((a ^ c) - _rot(c, 11)) & _M32
    b = ((b ^ a) - _rot(a, 25)) & _M32
    c = ((c ^ b) - _rot(b, 16)) & _M32
    a = ((a ^ c) - _rot(c, 4)) & _M32
    b = ((b ^ a) - _rot(a, 14)) & _M32
    c = ((c ^ b) - _rot(b, 24)) & _M32
    return c


def clear_write_flags(path: Path) -> bool:
    """Clear the 'open for writing' flags that a killed SWMR writer leaves in the
    HDF5 superblock (version 2/3 at offset 0), so the file can be reopened to
    resume. The superblock's checksum is verified before and rewritten after;
    anything unexpected leaves the file untouched (returns False)."""
    with open(path, "r+b") as handle:
        head = handle.read(64)
        if head[:8] != b"\x89HDF\r\n\x1a\n" or len(head) < 12 or head[8] not in (2, 3):
            return False
        size = 12 + 4 * head[9] + 4
        if len(head) < size:
            return False
        body, stored = head[:size - 4], int.from_bytes(head[size - 4:size], "little")
        if lookup3(body) != stored:
            return False
        body = body[:11] + b"\0" + body[12:]
        handle.seek(0)
        handle.write(body + lookup3(body).to_bytes(4, "little"))
    return True
