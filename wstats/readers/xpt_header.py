"""Transport (XPORT) version 5 header records: the member, its NAMESTRs and where data start.

Layout from "The Record Layout of a Data Set in Transport (XPORT) Format", technical support
document TS-140 (from memory); see :mod:`wstats.readers.xpt` for the whole file.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

from wstats.errors import ReadError
from wstats.readers.ibm import Variable, text_of

_RECORD = 80


_NAMESTR = 140


_FIRST_NAMESTR = 640


_HEADER_HEAD = b"HEADER RECORD*******"


_HEADER_TAIL = b"HEADER RECORD!!!!!!!"


_REFETCH = "re-download or re-export the file"


_LATER_KINDS = {"LIBV8", "MEMBV8", "DSCPTV8", "NAMSTV8", "OBSV8", "LABELV8", "LABELV9"}


# The fields of a NAMESTR record used here (TS-140's struct: ntype, nhfun, nlng, nvar0, nname,
# nlabel, nform, nfl, nfd, nfj, nfill, niform, nifl, nifd, npos, rest).
_NAMESTR_DTYPE = np.dtype({
    "names": ["ntype", "nlng", "nname", "nlabel", "nform", "nfl", "nfd", "npos"],
    "formats": [">i2", ">i2", "S8", "S40", "S8", ">i2", ">i2", ">i4"],
    "offsets": [0, 4, 8, 16, 56, 64, 66, 84], "itemsize": _NAMESTR,
})


class XptUnsupported(Exception):
    """The file is a transport file this reader leaves to pyreadstat (v8/v9, several members)."""


@dataclass(frozen=True)
class _Header:
    """What the header records say about the one member of a version 5 file."""

    path: str
    size: int
    variables: tuple[Variable, ...]
    record_len: int
    data_start: int
    file_label: str | None


def _pread(fd: int, offset: int, count: int) -> bytes:
    """Read up to *count* bytes at *offset* (fewer at the end of the file)."""
    buf = bytearray(count)
    return bytes(buf[: _read_into(fd, memoryview(buf), offset)])


def _header_kind(record: bytes) -> str | None:
    """Return the kind of a header record (``MEMBER``, ``LIBV8``, ...) or None if not one."""
    if record[:20] != _HEADER_HEAD or record[28:48] != _HEADER_TAIL:
        return None
    return record[20:28].decode("ascii", "replace").strip()


def _expect(record: bytes, kind: str, path: str, at: int) -> None:
    """Check that the 80-byte record at byte *at* is a version 5 header of *kind*."""
    found = _header_kind(record)
    if found == kind:
        return
    if found in _LATER_KINDS:
        raise XptUnsupported(f"{path}: {found} header at byte {at} where {kind} was expected")
    if at == 0:
        raise ReadError(f"{path} is not a transport (XPORT) file: it does not start with a "
                        "library header record; check that the file type matches its extension")
    raise ReadError(f"{path} is corrupt: no {kind} header record at byte {at}; {_REFETCH}")


def _read_header(fd: int, path: str, size: int) -> _Header:
    """Parse the header records and NAMESTRs of a version 5 transport file."""
    if size == 0:
        raise ReadError(f"{path} is empty (0 bytes); {_REFETCH}")
    head = _pread(fd, 0, _FIRST_NAMESTR)
    _expect(head[:_RECORD], "LIBRARY", path, 0)
    if len(head) < _FIRST_NAMESTR:
        raise ReadError(f"{path} is truncated: it ends at byte {size}, inside the header; "
                        f"{_REFETCH}")
    for at, kind in ((240, "MEMBER"), (320, "DSCRPTR"), (560, "NAMESTR")):
        _expect(head[at : at + _RECORD], kind, path, at)
    if head[240 + 74 : 240 + 78] != b"0140":
        raise XptUnsupported(f"{path}: NAMESTR records are not 140 bytes long")
    nvar = _number(head[560 + 54 : 560 + 58], path)
    block_len = -(-nvar * _NAMESTR // _RECORD) * _RECORD
    block = _pread(fd, _FIRST_NAMESTR, block_len + _RECORD)
    if len(block) < block_len + _RECORD:
        raise ReadError(f"{path} is truncated: header says {nvar} variables but the file "
                        f"ends at byte {size}; {_REFETCH}")
    _expect(block[block_len:], "OBS", path, _FIRST_NAMESTR + block_len)
    variables = _parse_namestrs(block[: nvar * _NAMESTR], nvar, path)
    return _Header(path, size, variables, _record_length(variables, path),
                   _FIRST_NAMESTR + block_len + _RECORD, text_of(head[512:552]) or None)


def _number(field: bytes, path: str) -> int:
    """Parse a count written as ASCII digits in a header record."""
    if not field.isdigit():
        raise ReadError(f"{path} is corrupt: the variable count {field!r} is not a number; "
                        f"{_REFETCH}")
    return int(field)


def _parse_namestrs(raw: bytes, nvar: int, path: str) -> tuple[Variable, ...]:
    """Turn the NAMESTR records into variables, checking each one."""
    table = np.frombuffer(raw, dtype=_NAMESTR_DTYPE, count=nvar)
    variables: list[Variable] = []
    seen: set[str] = set()
    for i, entry in enumerate(table):  # one NAMESTR per variable
        name = text_of(entry["nname"])
        ntype, width = int(entry["ntype"]), int(entry["nlng"])
        where = f"{path} is corrupt: variable #{i + 1} ({name!r})"
        if not name or name in seen:
            raise ReadError(f"{where} has an empty or repeated name; {_REFETCH}")
        if ntype not in (1, 2) or width < 1 or (ntype == 1 and not 2 <= width <= 8):
            raise ReadError(f"{where} has type {ntype} and length {width}; {_REFETCH}")
        seen.add(name)
        form = _format_name(text_of(entry["nform"]), int(entry["nfl"]), int(entry["nfd"]))
        label = text_of(entry["nlabel"]) or None
        variables.append(Variable(name, ntype == 1, width, int(entry["npos"]), label, form))
    return tuple(variables)


def _record_length(variables: tuple[Variable, ...], path: str) -> int:
    """Return the observation length, checking that the variables tile it without gaps."""
    length = 0
    for var in sorted(variables, key=lambda v: v.position):
        if var.position != length:
            raise XptUnsupported(f"{path}: variable {var.name!r} is not where its position says")
        length += var.width
    if length == 0:
        raise XptUnsupported(f"{path}: no variables")
    return length


def _format_name(name: str, width: int, decimals: int) -> str | None:
    """Write a display format the usual way: name, width, point, decimals (``F8.2``)."""
    if not name and width == 0 and decimals == 0:
        return None
    return f"{name}{width or ''}.{decimals or ''}"


def _read_into(fd: int, view: memoryview, offset: int) -> int:
    """Fill *view* from *offset* until full or at the end of the file; return the bytes read."""
    got = 0
    while got < len(view):
        if hasattr(os, "preadv"):  # straight into the buffer
            step = os.preadv(fd, [view[got:]], offset + got)
        else:
            data = os.pread(fd, len(view) - got, offset + got)
            view[got : got + len(data)] = data
            step = len(data)
        if step == 0:
            break
        got += step
    return got
