"""Ingest: a lab's rig file, as bytes, into internal units and the internal (ISO 8855) axes.

It parses the bytes the loader read (:mod:`dossier.project.load`) and opens no file. It accepts
CSV-like text with ``,``, ``;`` or tab separators and ``.`` or ``,`` decimal marks, maps the
manifest's column names to channels, converts units (:mod:`dossier.standards.units`) and signs
(:mod:`dossier.standards.axes`), and refuses anything it cannot read with the file, line and
column named.
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from ..common.errors import RigDataError
from ..project.manifest import CHANNELS, RunSpec
from ..standards import axes, units

EMPTY_ROW = "empty row (every cell blank)"
IMPLAUSIBLE = "implausible value (beyond any rig's range: an overflow or no-data sentinel?)"

# Magnitudes no rig measures, in internal units: values beyond them are not data (data-acquisition
# systems write sentinels such as -9.9e37 for an overflow). Far above every tire: a truck tire
# carries about 60 kN, rigs load to a few hundred kN.
PLAUSIBLE_LIMIT = {
    "force": 1e6,
    "moment": 1e5,
    "angle": 90.0,
    "slip_ratio": 100.0,
    "pressure": 1e5,
    "speed": 1e4,
    "time": 1e9,
}


@dataclass(frozen=True)
class RejectedRow:
    """A row of the file that is not a sample: where, why, and the cell that shows it."""

    line: int
    reason: str
    column: str = ""
    cell: str = ""


@dataclass(frozen=True)
class RigRun:
    """One rig file, read: channels in internal units and axes, one row per sample."""

    spec: RunSpec
    sha256: str
    channels: dict[str, np.ndarray]  # channel -> values (internal units, ISO 8855)
    line_numbers: np.ndarray  # 1-based line in the file of each sample, for provenance
    rejected: tuple[RejectedRow, ...] = ()  # rows read but not kept as samples, each with its reason

    @property
    def n_samples(self) -> int:
        return int(self.line_numbers.size)


def parse_run(raw: bytes, spec: RunSpec, sha256: str | None = None) -> RigRun:
    """Parse the bytes of the rig file of `spec` (as the loader read them) into a :class:`RigRun`.

    `sha256`: the digest of `raw` where the loader computed it (each input is hashed once). A clean
    numeric table is parsed straight from the bytes (only the lines before the data are decoded);
    anything else goes through the careful parser, which decodes the whole file.
    """
    shown = spec.file
    digest = sha256 or hashlib.sha256(raw).hexdigest()
    fast = _fast_run(raw, spec, shown)
    if fast is not None:
        channels, lines, rejected = fast
        return RigRun(spec=spec, sha256=digest, channels=channels, line_numbers=lines, rejected=rejected)
    encoding = "utf-8-sig"
    try:
        text = raw.decode(encoding)
    except UnicodeDecodeError:
        encoding = "latin-1"  # labs' tools often write Windows-1252 headers (e.g. '°')
        text = raw.decode(encoding)
    channels, lines, rejected = parse_table(text, spec, shown)
    return RigRun(spec=spec, sha256=digest, channels=channels, line_numbers=lines, rejected=rejected)


def _fast_run(raw: bytes, spec: RunSpec, shown: str):
    """The parse of a clean numeric table from its bytes, decoding only the lines before the data;
    None whenever anything is unusual (the careful path then finds and names it)."""
    first = spec.header_line + spec.skip_after_header
    end = -1
    for _ in range(first):
        end = raw.find(b"\n", end + 1)
        if end < 0:
            return None
    try:
        head_text = raw[: end + 1].decode("utf-8-sig")
        encoding = "utf-8-sig"
    except UnicodeDecodeError:
        head_text, encoding = raw[: end + 1].decode("latin-1"), "latin-1"  # as the careful path decides
    head = head_text.split("\n", spec.header_line)[: spec.header_line]
    if len(head) < spec.header_line or not head[-1].strip():
        return None
    try:
        header, index = _header_index(head[-1], spec, shown)
    except RigDataError:
        return None
    fast = _fast_table(raw, encoding, spec, index, len(header), first)
    if fast is None:
        return None
    kept, kept_lines, rejected = _keep_plausible(_to_internal(fast[0], spec), fast[1], spec, header, index, ())
    if not kept_lines.size:
        return None
    _check_plausible(kept, kept_lines, spec, shown)
    return kept, kept_lines, rejected


def _header_index(line: str, spec: RunSpec, shown: str) -> tuple[list[str], dict[str, int]]:
    """The header's column names and, for each channel of `spec`, the index of its column."""
    try:
        header = [h.strip() for h in next(csv.reader([line.rstrip("\r")], delimiter=spec.delimiter), [])]
    except csv.Error as exc:
        raise RigDataError(
            shown, f"the header cannot be read as delimited text ({exc})", line=spec.header_line
        ) from None
    index: dict[str, int] = {}
    for channel, col in spec.columns.items():
        matches = [i for i, h in enumerate(header) if h == col.name]
        if not matches:
            raise RigDataError(
                shown,
                f"no column named {col.name!r} for channel '{channel}' "
                f"(manifest {spec.location}.columns.{channel}.name); header has: {', '.join(header)}",
                line=spec.header_line,
            )
        if len(matches) > 1:
            raise RigDataError(
                shown, f"column name {col.name!r} appears {len(matches)} times in the header", line=spec.header_line
            )
        index[channel] = matches[0]
    return header, index


def parse_table(
    text: str, spec: RunSpec, shown: str
) -> tuple[dict[str, np.ndarray], np.ndarray, tuple[RejectedRow, ...]]:
    """Parse rig-file text per `spec`, row by row; return internal channels, source line numbers and
    the rows not kept (empty, or with implausible values), each with its reason. The careful path:
    every problem is named with its file, line and column (clean tables take :func:`_fast_run`)."""
    if not text.strip():
        raise RigDataError(shown, f"the file is empty; expected a header on line {spec.header_line} and data rows")
    head = text.split("\n", spec.header_line)[: spec.header_line]
    if len(head) < spec.header_line or (
        len(head) == spec.header_line and not head[-1].strip() and spec.header_line > 1
    ):
        raise RigDataError(shown, f"expected a header on line {spec.header_line}; the file has {len(head)} line(s)")
    header, index = _header_index(head[-1], spec, shown)

    first = spec.header_line + spec.skip_after_header  # 0-based index of the first data row
    # One row per physical line (a quote never joins lines), so that every line number is the
    # file's own.
    rows = []
    for line_i, line in enumerate(text.split("\n")):
        try:
            rows.append(next(csv.reader([line.removesuffix("\r")], delimiter=spec.delimiter), []))
        except csv.Error as exc:
            raise RigDataError(
                shown,
                f"cannot be read as delimited text ({exc}); is it a text export of the rig data?",
                line=line_i + 1,
            ) from None
    values: dict[str, list[float]] = {ch: [] for ch in index}
    lines: list[int] = []
    empty: list[RejectedRow] = []
    for row_i in range(first, len(rows)):
        row = rows[row_i]
        line_no = row_i + 1
        if not row or row[0].lstrip().startswith("#"):
            continue  # a blank line or a comment
        if not any(cell.strip() for cell in row):
            empty.append(RejectedRow(line_no, EMPTY_ROW))
            continue
        if len(row) != len(header):
            hint = (
                "truncated line?"
                if len(row) < len(header)
                else f"a stray {spec.delimiter!r}, or a thousands separator splitting a number?"
            )
            raise RigDataError(
                shown,
                f"expected {len(header)} fields as in the header (line {spec.header_line}); found {len(row)} ({hint})",
                line=line_no,
            )
        for ch, col_i in index.items():
            values[ch].append(_number(row[col_i], spec.decimal, shown, line_no, header[col_i]))
        lines.append(line_no)
    if not lines:
        raise RigDataError(shown, "has a header but no data rows")

    channels = _to_internal({ch: np.asarray(vals, dtype=float) for ch, vals in values.items()}, spec)
    line_arr = np.asarray(lines, dtype=np.int64)
    line_arr.setflags(write=False)
    channels, line_arr, rejected = _keep_plausible(channels, line_arr, spec, header, index, tuple(empty))
    if not line_arr.size:
        raise RigDataError(shown, f"has no usable data rows ({len(rejected)} rejected: {rejected[0].reason})")
    _check_plausible(channels, line_arr, spec, shown)
    return channels, line_arr, rejected


def _unit_mislabel(channel: str, values: np.ndarray, spec: RunSpec, column: str, limit: float) -> None:
    """Most of a column beyond any rig's range is a unit written wrong, not a few bad rows: say
    which unit the values look like, where the manifest can set it."""
    quantity = CHANNELS[channel]
    unit = spec.columns[channel].unit
    factor = units.factor_to_internal(quantity, unit)
    typical = float(np.nanmedian(np.abs(values[np.isfinite(values)]))) if np.isfinite(values).any() else float("inf")
    raw = typical / factor
    fits = [
        u for u in units.accepted_units(quantity) if u != unit and raw * units.factor_to_internal(quantity, u) <= limit
    ]
    internal = units.UNITS[quantity][0]
    looks = f": the values look like {fits[0]}" if fits else ""
    raise RigDataError(
        spec.file,
        f"column {column!r} reaches a typical {typical:.4g} {internal} after converting from {unit!r}, beyond any "
        f"rig's range ({limit:g} {internal}){looks} (manifest {spec.location}.columns.{channel}.unit)",
    )


def _keep_plausible(channels, lines, spec: RunSpec, header, index, rejected: tuple[RejectedRow, ...]):
    """Drop the rows with a value no rig measures (non-finite after conversion, or beyond
    :data:`PLAUSIBLE_LIMIT`), each recorded with its line, column and value."""
    bad = np.zeros(lines.size, dtype=bool)
    first_bad: dict[int, tuple[str, float]] = {}
    for ch, arr in channels.items():
        limit = PLAUSIBLE_LIMIT[CHANNELS[ch]]
        with np.errstate(invalid="ignore"):
            wrong = ~np.isfinite(arr) | (np.abs(arr) > limit)
        if arr.size and np.count_nonzero(wrong) > arr.size // 2:
            _unit_mislabel(ch, arr, spec, header[index[ch]], limit)
        for i in np.flatnonzero(wrong & ~bad):
            first_bad[int(i)] = (header[index[ch]], float(arr[i]))
        bad |= wrong
    if not bad.any():
        return channels, lines, rejected
    out = []
    for i in np.flatnonzero(bad):
        column, value = first_bad[int(i)]
        out.append(RejectedRow(int(lines[i]), IMPLAUSIBLE, column, f"{value:.6g} (internal units)"))
    keep = ~bad
    kept = {}
    for ch, arr in channels.items():
        a = np.array(arr[keep])
        a.setflags(write=False)
        kept[ch] = a
    line_arr = np.array(lines[keep])
    line_arr.setflags(write=False)
    return kept, line_arr, tuple(sorted((*rejected, *out), key=lambda r: r.line))


def _to_internal(raw: dict[str, np.ndarray], spec: RunSpec) -> dict[str, np.ndarray]:
    channels = {}
    for ch, vals in raw.items():
        with np.errstate(over="ignore"):  # a value beyond float range becomes inf: rejected as non-finite
            arr = vals * units.factor_to_internal(CHANNELS[ch], spec.columns[ch].unit)
        arr = axes.to_internal(ch, arr, spec.axis_convention)
        arr.setflags(write=False)
        channels[ch] = arr
    return channels


def _fast_table(raw: bytes, encoding: str, spec: RunSpec, index: dict[str, int], n_fields: int, first: int):
    """Parse a clean numeric table with the C reader of pandas; None when anything is unusual.

    Clean means: exactly one row per line after the header (no blank or comment lines, which
    would shift the line numbers), the header's number of fields on every line, and every value
    a finite number. Anything else goes to the careful row-by-row parser, which names the
    file, line and column of the problem.
    """
    start = 0
    for _ in range(first):  # skip the header and the lines after it, without splitting the file
        nl = raw.find(b"\n", start)
        if nl < 0:
            return None
        start = nl + 1
    end = len(raw)
    while end > start and raw[end - 1 : end] in (b"\n", b"\r", b" ", b"\t"):
        end -= 1
    if end <= start or spec.delimiter == spec.decimal:
        return None
    if spec.decimal == "," and raw.find(b".", start, end) >= 0:
        return None  # a '.' in a decimal-comma file: the careful parser says where
    first_end = raw.find(b"\n", start, end)
    if raw.count(spec.delimiter.encode(), start, first_end if first_end >= 0 else end) != n_fields - 1:
        return None
    cols = sorted(set(index.values()))
    pieces = _pieces(raw, start, end)
    # The reader's tokenizer and number conversion release the GIL: one thread a piece.
    with ThreadPoolExecutor(len(pieces)) as threads:
        parts = list(threads.map(lambda ab: _read_piece(raw, ab[0], ab[1], spec, encoding, n_fields, cols), pieces))
    if any(part is None for part in parts):
        return None
    columns = parts[0] if len(parts) == 1 else {i: np.concatenate([part[i] for part in parts]) for i in cols}
    n_lines = columns[cols[0]].size  # each piece holds exactly one row per line (checked there)
    line_numbers = np.arange(first + 1, first + 1 + n_lines, dtype=np.int64)
    line_numbers.setflags(write=False)
    return {ch: columns[i] for ch, i in index.items()}, line_numbers


PIECE_BYTES = 8 << 20  # a table larger than this is read in pieces, one thread each (up to one per CPU)


def _pieces(raw: bytes, start: int, end: int) -> list[tuple[int, int]]:
    """Byte ranges of `raw[start:end]` that begin and end at line boundaries, about equal in size."""
    n = max(1, min(os.cpu_count() or 1, (end - start) // PIECE_BYTES))
    cuts = [start]
    for k in range(1, n):
        nl = raw.find(b"\n", start + (end - start) * k // n, end)
        if nl < 0:
            break
        if nl + 1 > cuts[-1]:
            cuts.append(nl + 1)
    return [(a, b) for a, b in zip(cuts, [*cuts[1:], end]) if b > a]


def _read_piece(raw: bytes, a: int, b: int, spec: RunSpec, encoding: str, n_fields: int, cols: list[int]):
    """The used columns of the lines in `raw[a:b]` (float64), or None if a line is not clean."""
    import pandas  # its C reader is several times faster than anything hand-written here

    piece = raw[a:b]
    n_lines = piece.count(b"\n") + (0 if piece.endswith(b"\n") else 1)
    try:
        frame = pandas.read_csv(
            io.BytesIO(piece),
            sep=spec.delimiter,
            decimal=spec.decimal,
            header=None,  # every column, not `usecols`: with it, the reader ignores extra fields
            dtype=float,
            engine="c",
            na_filter=False,
            skip_blank_lines=False,
            encoding=encoding,
        )
    except (ValueError, TypeError, UnicodeDecodeError, pandas.errors.ParserError):
        return None
    if frame.shape != (n_lines, n_fields):
        return None  # a row with more or fewer fields: the careful parser names its line
    columns = {i: frame.iloc[:, i].to_numpy(dtype=float, copy=True) for i in cols}  # only the used ones
    if not all(np.all(np.isfinite(c)) for c in columns.values()):
        return None
    return columns


def _number(cell: str, decimal: str, shown: str, line: int, column: str) -> float:
    s = cell.strip()
    if decimal == "," and "." in s:
        raise RigDataError(
            shown,
            f"found {cell!r} in a file with decimal comma (manifest decimal = ','); a '.' here is "
            "a thousands separator or a different decimal mark: the value is ambiguous",
            line=line,
            column=column,
        )
    if decimal == ",":
        s = s.replace(",", ".")
    try:
        value = float(s)
    except ValueError:
        raise RigDataError(
            shown, f"expected a number with decimal mark {decimal!r}; found {cell!r}", line=line, column=column
        ) from None
    if not math.isfinite(value):
        raise RigDataError(shown, f"expected a finite number; found {cell!r}", line=line, column=column)
    return value


def _check_plausible(channels: dict[str, np.ndarray], lines: np.ndarray, spec: RunSpec, shown: str) -> None:
    """Stop data that are probably in the wrong sign convention or unit, saying what was likely meant."""
    fz = channels["fz"]
    if np.median(fz) < 0:
        other = axes.ISO_8855 if spec.axis_convention == axes.SAE_J670 else axes.SAE_J670
        raise RigDataError(
            shown,
            f"normal load is negative after converting from {spec.axis_convention} "
            f"(median {np.median(fz):.0f} N); the file is probably in {other} "
            f"(manifest {spec.location}.axis_convention)",
        )
    t = channels["time"]
    if t.size > 1 and np.any(np.diff(t) < 0):
        bad = int(np.argmax(np.diff(t) < 0)) + 1
        raise RigDataError(
            shown,
            "time goes backwards; rows must be in recording order",
            line=int(lines[bad]),
            column=spec.columns["time"].name,
        )
    if spec.sweep == "slip_angle" and "fy" in channels:
        a, fy = channels["slip_angle"], channels["fy"]
        near = np.abs(a) <= 4.0
        if np.count_nonzero(near) >= 20 and np.ptp(a[near]) > 1.0:
            slope = np.polyfit(a[near], fy[near], 1)[0]
            typical = np.median(np.abs(channels["fz"])) * 0.02  # a tire gives at least ~0.02 Fz per degree
            if slope > typical:
                raise RigDataError(
                    shown,
                    f"lateral force rises with slip angle after converting from "
                    f"{spec.axis_convention} ({slope:+.0f} N/deg); in SAE J670 and ISO 8855 alike a "
                    "positive slip angle gives a negative lateral force. The Fy or slip-angle column "
                    "probably has the opposite sign (check the lab's convention and "
                    f"manifest {spec.location}.axis_convention)",
                )
    span = float(np.ptp(channels["slip_angle"])) if "slip_angle" in channels else None
    if span is not None and span < 1.0 and spec.columns["slip_angle"].unit == "deg" and spec.sweep == "slip_angle":
        raise RigDataError(
            shown,
            f"slip angle spans only {span:.3f} deg; the column is probably in radians "
            f"(manifest {spec.location}.columns.slip_angle.unit)",
        )
