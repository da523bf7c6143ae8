"""Header and line checks of the mesh formats (PLY, STL, OBJ, OFF), and a direct reader of plain binary PLY.

The parsers do not always notice a truncated file, wrong counts or ragged lines; these checks compare a
file's header with its size or its lines, before parsing, and name the line at fault when they can.
:mod:`bandgeo.scan.readers` calls them; every failure is an ``InputError`` of one line.
"""
from __future__ import annotations

import re

import numpy as np

from ..errors import InputError

_PLY_SIZES = {"char": 1, "int8": 1, "uchar": 1, "uint8": 1, "short": 2, "int16": 2, "ushort": 2,
              "uint16": 2, "int": 4, "int32": 4, "uint": 4, "uint32": 4, "float": 4, "float32": 4,
              "double": 8, "float64": 8}
_PLY_NP = {"char": "i1", "int8": "i1", "uchar": "u1", "uint8": "u1", "short": "i2", "int16": "i2",
           "ushort": "u2", "uint16": "u2", "int": "i4", "int32": "i4", "uint": "u4", "uint32": "u4",
           "float": "f4", "float32": "f4", "double": "f8", "float64": "f8"}


def _fail(name: str, message: str) -> InputError:
    return InputError(f"'{name}': {message}")

# ----------------------------------------------------------------------------------------------- PLY
def _parse_ply_header(data: bytes, name: str):
    """Return (format, header_length, elements) with elements = [(name, count, [(kind, types...)])]."""
    if not data.startswith(b"ply"):
        raise _fail(name, "does not start with 'ply', so it is not a PLY file (a text or other file renamed "
                          ".ply?); re-export the scan as PLY")
    match = re.search(rb"end_header[ \t]*\r?\n", data[:1 << 20])
    if match is None:
        raise _fail(name, "PLY header has no 'end_header' line; the file is truncated or not a PLY file, "
                          "re-export it")
    header = data[:match.start()].decode("ascii", errors="replace").splitlines()
    fmt, elements = None, []
    for lineno, line in enumerate(header, start=1):
        words = line.split()
        if not words or words[0] in ("comment", "obj_info", "ply"):
            continue
        try:
            if words[0] == "format":
                fmt = words[1]
            elif words[0] == "element":
                elements.append((words[1], int(words[2]), []))
            elif words[0] == "property":
                if words[1] == "list":
                    elements[-1][2].append(("list", words[2], words[3]))
                else:
                    elements[-1][2].append(("scalar", words[1]))
        except (IndexError, ValueError):
            raise _fail(name, f"PLY header line {lineno} ({line.strip()!r}) is malformed; re-export the scan")
    if fmt not in ("ascii", "binary_little_endian", "binary_big_endian"):
        raise _fail(name, f"PLY format {fmt!r} is not ascii, binary_little_endian or binary_big_endian; "
                          "re-export the scan")
    for el_name, count, props in elements:
        if count < 0:
            raise _fail(name, f"PLY header gives a negative count for element '{el_name}'; re-export the scan")
        for prop in props:
            types = prop[1:] if prop[0] == "list" else prop[1:2]
            for t in types:
                if t not in _PLY_SIZES:
                    raise _fail(name, f"PLY property type {t!r} is unknown; re-export the scan")
    return fmt, match.end(), elements


def _count_data_lines(data: bytes, start: int) -> int:
    """Number of lines after ``start`` holding anything but white space (vectorized; no per-line objects)."""
    buf = np.frombuffer(data, dtype=np.uint8, offset=start)
    if len(buf) == 0:
        return 0
    starts = np.concatenate([[0], np.flatnonzero(buf == 10) + 1])
    starts = starts[starts < len(buf)]  # each line with its newline: never an empty segment
    filled = ~np.isin(buf, np.frombuffer(b" \t\r\n\x0b\x0c", dtype=np.uint8))
    per_line = np.add.reduceat(filled, starts, dtype=np.int32)
    return int(np.count_nonzero(per_line))


def _check_ply(data: bytes, name: str) -> str:
    fmt, start, elements = _parse_ply_header(data, name)
    counts = {el: count for el, count, _ in elements}
    if counts.get("vertex", 0) == 0:
        raise _fail(name, "PLY file declares no vertices; the scan is empty, re-export it")
    if counts.get("face", 0) == 0:
        raise _fail(name, f"holds points only ({counts['vertex']} vertices, no faces); mesh the point cloud "
                          "first (for example by Poisson reconstruction) and export the faces")
    body = len(data) - start
    if fmt == "ascii":
        n_lines = _count_data_lines(data, start)
        expected = sum(counts.values())
        if n_lines != expected:
            raise _fail(name, f"PLY header declares {expected} data lines "
                              f"({', '.join(f'{c} {e}' for e, c in counts.items())}) but the file holds "
                              f"{n_lines}; the header counts are wrong or the file is truncated, re-export it")
        return "ply-ascii"
    order = "<" if fmt == "binary_little_endian" else ">"
    offset = start
    for el_name, count, props in elements:
        fixed = sum(_PLY_SIZES[p[1]] for p in props if p[0] == "scalar")
        lists = [p for p in props if p[0] == "list"]
        if not lists:
            offset += count * fixed
            continue
        if len(lists) == 1 and props[0][0] == "list" and count > 0 and offset + _PLY_SIZES[lists[0][1]] <= len(data):
            # peek at the first polygon's vertex count: garbage here means the counts before are wrong
            first = int(np.frombuffer(data, dtype=order + _PLY_NP[lists[0][1]], count=1, offset=offset)[0])
            if el_name == "face" and not 3 <= first <= 64:
                raise _fail(name, f"the first face claims {first} vertices; the PLY header counts do not match "
                                  "the data (wrong vertex count?), re-export the scan")
            if el_name == "face" and first == 3:
                per = fixed + _PLY_SIZES[lists[0][1]] + 3 * _PLY_SIZES[lists[0][2]]
                offset += count * per
                continue
        # polygons of unknown size: at least a triangle each
        offset += count * (fixed + sum(_PLY_SIZES[p[1]] + 3 * _PLY_SIZES[p[2]] for p in lists))
    if offset > len(data):
        raise _fail(name, f"binary PLY ends early: the header promises at least {offset - start} bytes of data "
                          f"but only {body} follow; the file is truncated (copy or export it again)")
    return "ply-binary-le" if order == "<" else "ply-binary-be"


def _fast_binary_ply(data: bytes):
    """(vertices, faces, colors) of a plain binary triangle PLY read straight from its blocks, or None.

    Plain means: exactly a ``vertex`` element of scalar properties including float/double x, y, z
    (uchar red/green/blue kept as colours), then a ``face`` element whose one list property holds three
    indices on every face, and no texture. Anything else returns None and goes to trimesh. Gives the
    same arrays as trimesh's reader (float64 vertices, int64 faces, RGB uint8), several times faster.
    """
    match = re.search(rb"end_header[ \t]*\r?\n", data[:1 << 20])
    if match is None:
        return None
    lines = data[:match.start()].decode("ascii", errors="replace").splitlines()
    fmt, elements = None, []
    for line in lines:
        words = line.split()
        if not words or words[0] in ("ply", "obj_info"):
            continue
        if words[0] == "comment":
            if "texture" in line.lower():
                return None
        elif words[0] == "format" and len(words) >= 2:
            fmt = words[1]
        elif words[0] == "element" and len(words) == 3 and words[2].isdigit():
            elements.append((words[1], int(words[2]), []))
        elif words[0] == "property" and elements and len(words) in (3, 5):
            elements[-1][2].append(tuple(words[1:]))
        else:
            return None
    if fmt not in ("binary_little_endian", "binary_big_endian") or [e[0] for e in elements] != ["vertex", "face"]:
        return None
    order = "<" if fmt == "binary_little_endian" else ">"
    (_, nv, vprops), (_, nf, fprops) = elements
    if any(p[0] == "list" or p[0] not in _PLY_NP for p in vprops):
        return None
    vnames = [p[1] for p in vprops]
    colour = [c for c in ("red", "green", "blue", "alpha") if c in vnames]
    if len(set(vnames)) != len(vnames) or not {"x", "y", "z"} <= set(vnames) \
            or not set(vnames) <= {"x", "y", "z", "nx", "ny", "nz", "red", "green", "blue", "alpha"} \
            or any(vprops[vnames.index(c)][0] not in ("float", "float32", "double", "float64") for c in "xyz") \
            or (colour and (colour[:3] != ["red", "green", "blue"]
                            or any(vprops[vnames.index(c)][0] not in ("uchar", "uint8") for c in colour))):
        return None
    if len(fprops) != 1 or len(fprops[0]) != 4 or fprops[0][0] != "list" \
            or fprops[0][3] not in ("vertex_indices", "vertex_index") or fprops[0][1] not in _PLY_NP \
            or fprops[0][2] not in _PLY_NP or _PLY_NP[fprops[0][2]][0] == "f" or _PLY_NP[fprops[0][1]][0] == "f":
        return None
    lists = fprops
    try:
        vdt = np.dtype([(p[1], order + _PLY_NP[p[0]]) for p in vprops])
        fdt = np.dtype([("_n", order + _PLY_NP[lists[0][1]]), ("_i", order + _PLY_NP[lists[0][2]], (3,))])
    except (TypeError, ValueError):
        return None
    start = match.end()
    if start + nv * vdt.itemsize + nf * fdt.itemsize != len(data) or nv == 0 or nf == 0:
        return None  # not all triangles, or trailing bytes: let trimesh decide
    vrec = np.frombuffer(data, dtype=vdt, count=nv, offset=start)
    frec = np.frombuffer(data, dtype=fdt, count=nf, offset=start + nv * vdt.itemsize)
    if not np.all(frec["_n"] == 3):
        return None
    vertices = np.empty((nv, 3))
    for k, c in enumerate("xyz"):
        vertices[:, k] = vrec[c]
    faces = frec["_i"].astype(np.int64)
    colors = None
    if colour:
        colors = np.empty((nv, 3), dtype=np.uint8)
        for k, c in enumerate(("red", "green", "blue")):
            colors[:, k] = vrec[c]
    return vertices, faces, colors


# ------------------------------------------------------------------------------------------ STL / OFF
def _check_stl(data: bytes, name: str) -> str:
    if len(data) >= 84:
        n = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0])
        if len(data) == 84 + 50 * n:
            if n == 0:
                raise _fail(name, "binary STL holds no triangles; re-export the scan")
            return "stl-binary"
    head = data[:512].lstrip().lower()
    if head.startswith(b"solid") and b"facet" in data[:4096].lower():
        return "stl-ascii"
    if len(data) >= 84:
        n = int(np.frombuffer(data, dtype="<u4", count=1, offset=80)[0])
        raise _fail(name, f"binary STL header promises {n} triangles ({84 + 50 * n} bytes) but the file has "
                          f"{len(data)} bytes; it is truncated or not an STL file, export it again")
    raise _fail(name, "is neither an ASCII nor a binary STL file; export the scan again")


_OBJ_V = re.compile(rb"(?m)^[ \t]*v(?:[ \t]+([^\r\n#]*)|[ \t]*(?=\r?$))")
_BLANK = np.zeros(256, dtype=bool)
_BLANK[list(b" \t\r\n\x0b\x0c")] = True
_INDENT = np.zeros(256, dtype=bool)
_INDENT[list(b" \t")] = True


def _obj_vertex_lines(data: bytes):
    """(number of values on each ``v`` line, 1-based line number of each), vectorized over the bytes.

    A ``v`` line is one starting with ``v`` and a blank; values are the blank-separated words after it.
    Files with indented or commented ``v`` lines go through a regular expression instead (slower).
    """
    buf = np.frombuffer(data, dtype=np.uint8)
    starts = np.concatenate([[0], np.flatnonzero(buf == 10) + 1])
    starts = starts[starts < len(buf)]
    blank = _BLANK[buf]  # a table lookup: several times faster than np.isin here
    after = starts + 1
    last = after >= len(buf)
    is_v = (buf[starts] == ord("v")) & (last | blank[np.minimum(after, len(buf) - 1)])
    hashes = np.add.reduceat((buf == ord("#")).view(np.int8), starts, dtype=np.int32) > 0
    if (hashes & is_v).any() or _INDENT[buf[starts]].any():
        found = [(m.start(), m.group(1)) for m in _OBJ_V.finditer(data)]
        counts = np.array([len((g or b"").split()) for _, g in found], dtype=np.int64)
        numbers = np.array([data.count(b"\n", 0, pos) + 1 for pos, _ in found], dtype=np.int64)
        return counts, numbers
    word = ~blank
    word[1:] &= blank[:-1]  # a word starts at a non-blank after a blank (or at the start)
    per_line = np.add.reduceat(word.view(np.int8), starts, dtype=np.int32)
    return per_line[is_v].astype(np.int64) - 1, np.flatnonzero(is_v) + 1


def _line_text(data: bytes, lineno: int) -> str:
    """Line ``lineno`` (1-based) of ``data``, shortened, for a message."""
    lines = data.split(b"\n", lineno)
    return lines[lineno - 1].decode("latin-1").strip()[:40] if len(lines) >= lineno else ""


def _check_obj(data: bytes, name: str) -> str:
    """Every ``v`` line must hold 3 coordinates (optionally w, or r g b) and all lines alike: trimesh
    reads ragged lines as one flat list, which silently shifts every later coordinate."""
    counts, numbers = _obj_vertex_lines(data)
    if not len(counts):
        return "obj"  # the parser says what is missing
    short = np.flatnonzero(counts < 3)
    if len(short):
        k = int(short[0])
        raise _fail(name, f"OBJ line {numbers[k]} is a vertex line with {counts[k]} number"
                          f"{'' if counts[k] == 1 else 's'} ({_line_text(data, int(numbers[k]))!r}) but a "
                          "vertex needs x y z; the file is corrupt or truncated, re-export the scan")
    odd = np.flatnonzero(counts != counts[0])
    if len(odd):
        k = int(odd[0])
        raise _fail(name, f"OBJ vertex lines hold different numbers of values ({counts[0]} on line "
                          f"{numbers[0]}, {counts[k]} on line {numbers[k]}); the file is corrupt, "
                          "re-export the scan with the same fields on every vertex")
    return "obj"


def _obj_bad_number(data: bytes):
    """(line number, text) of the first ``v`` line holding something that is not a number, or None."""
    for match in _OBJ_V.finditer(data):
        try:
            [float(x) for x in (match.group(1) or b"").split()]
        except ValueError:
            return data.count(b"\n", 0, match.start()) + 1, (match.group(1) or b"").decode("latin-1").strip()[:40]
    return None


_OBJ_F = re.compile(rb"(?m)^[ \t]*f[ \t]+([^\r\n#]*)")


def _obj_bad_face(data: bytes):
    """(line number, vertex reference, vertex count) of the first ``f`` line naming a vertex that does
    not exist, or None."""
    n = len(_OBJ_V.findall(data))
    for match in _OBJ_F.finditer(data):
        for word in match.group(1).split():
            try:
                k = int(word.split(b"/")[0])
            except ValueError:
                continue
            if k == 0 or k > n or k < -n:
                return data.count(b"\n", 0, match.start()) + 1, k, n
    return None


def _check_off(data: bytes, name: str) -> str:
    text = data.decode("latin-1")
    tokens_lines = [line.split("#", 1)[0].split() for line in text.splitlines()]
    tokens_lines = [t for t in tokens_lines if t]
    if not tokens_lines or not tokens_lines[0][0].upper().endswith("OFF"):
        raise _fail(name, "does not start with 'OFF', so it is not an OFF file; re-export the scan")
    first = tokens_lines[0][1:]
    rest = tokens_lines[1:]
    if len(first) < 2:
        if not rest:
            raise _fail(name, "OFF file has no counts line; re-export the scan")
        first, rest = rest[0], rest[1:]
    try:
        nv, nf = int(first[0]), int(first[1])
    except (ValueError, IndexError):
        raise _fail(name, f"OFF counts line {' '.join(first)!r} is not 'vertices faces edges'; re-export the scan")
    if nf == 0:
        raise _fail(name, f"holds points only ({nv} vertices, no faces); mesh the points and export the faces")
    if len(rest) != nv + nf:
        raise _fail(name, f"OFF header declares {nv} vertices and {nf} faces but the file holds {len(rest)} "
                          "data lines; the counts are wrong or the file is truncated, re-export it")
    return "off"
