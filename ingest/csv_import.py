"""Import trend-log CSV exports: streamed in chunks, converted to SI, validated, then stored.

Each mapped column belongs to one point. Per data line: the timestamp is parsed (a strftime format
or ISO 8601; local times in the configured zone, or offsets when the text carries them) and every
mapped cell becomes a reading. Cells that are empty or a configured missing marker are no sample
and are skipped. Everything else that cannot become a reading goes to quarantine with the file, the
line number (line 1 is the header) and the reason: an unreadable or nonexistent local time (the
whole line), a value that is not a number, not finite, or outside the plausible range of its role
(that cell), a line with too many fields, and a last line without a line end (a cut-off file).
Readings are written with ``INSERT .. ON CONFLICT DO NOTHING``, so importing a file again adds
nothing.

Ambiguous local times (the repeated hour when clocks go back) are resolved by order: inside the
repeated hour, times are taken as summer time until they step backwards, then as standard time.

Line numbers assume one record per physical line (no line breaks inside quoted fields).
"""

from __future__ import annotations

import json
import re
import warnings
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
from sqlalchemy import Connection, Engine, select

from rimewatch.ingest.payload import MAX_ABS_VALUE, ROLE_RANGES_SI
from rimewatch.ingest.units import to_si, unit_kind
from rimewatch.store import QuarantineEntry, mark_reprocessed, write_quarantine, write_readings
from rimewatch.store.schema import Quarantine

_SKIPPED_LINE = re.compile(r"Skipping line (\d+)")
_HAS_OFFSET = r"(?:Z|[+-]\d\d:?\d\d)\s*$"
_WRITE_BATCH = 200_000


class CsvImportError(ValueError):
    """The file cannot be imported at all (missing timestamp column, no readable timestamps...)."""


@dataclass(frozen=True)
class CsvFormat:
    """How a trend-log export is written (the site file's ``csv:`` block)."""

    timestamp_column: str = "timestamp"
    timestamp_format: str | None = None
    timezone: str = "UTC"
    delimiter: str = ","
    decimal: str = "."
    encoding: str = "utf-8"
    missing_values: tuple[str, ...] = ("",)
    chunk_rows: int = 50_000


@dataclass(frozen=True)
class ColumnTarget:
    """The point a CSV column feeds: its id in the store, ``unit/role`` name, role and unit."""

    point_id: int
    name: str
    role: str
    unit: str


@dataclass
class ImportResult:
    lines: int = 0
    readings_stored: int = 0
    readings_already_stored: int = 0
    cells_empty: int = 0
    quarantined: int = 0
    columns_used: list[str] = field(default_factory=list)
    columns_ignored: list[str] = field(default_factory=list)
    columns_missing: list[str] = field(default_factory=list)
    first_ms: int | None = None
    last_ms: int | None = None


@dataclass
class _Problem:
    row: int  # position in the decoded frame
    column: str | None  # None: the whole line
    reason: str


@dataclass
class _Decoded:
    point_ids: np.ndarray
    ts_ms: np.ndarray
    values: np.ndarray
    rows: np.ndarray  # frame position of each reading
    problems: list[_Problem]
    empty_cells: int


@dataclass
class _FoldState:
    """Carries the ambiguous-hour ordering state across chunks."""

    previous_local: pd.Timestamp | None = None
    second_pass: bool = False


def _parse_timestamps(raw: pd.Series, fmt: CsvFormat, fold: _FoldState):
    """Raw timestamp strings -> (UTC epoch ms int64 array, per-row reason or "")."""
    text = raw.astype(str).str.strip()
    reasons = np.full(len(text), "", dtype=object)
    ms = np.zeros(len(text), dtype=np.int64)
    utc = pd.Series(pd.NaT, index=text.index, dtype="datetime64[us, UTC]")

    format_ = fmt.timestamp_format or "ISO8601"
    if fmt.timestamp_format is not None and "%z" in fmt.timestamp_format:
        offset_mask = np.ones(len(text), dtype=bool)
    elif fmt.timestamp_format is None:
        offset_mask = text.str.contains(_HAS_OFFSET, regex=True).to_numpy(dtype=bool)
    else:
        offset_mask = np.zeros(len(text), dtype=bool)
    if offset_mask.any():
        parsed = pd.to_datetime(text[offset_mask], format=format_, utc=True, errors="coerce")
        utc[offset_mask] = parsed.dt.as_unit("us")
    local_mask = ~offset_mask
    if local_mask.any():
        naive = pd.to_datetime(text[local_mask], format=format_, errors="coerce").dt.as_unit("us")
        if naive.dt.tz is not None:  # the format carried its own zone
            utc[local_mask] = naive.dt.tz_convert("UTC")
        else:
            utc[local_mask] = _localize(naive, fmt.timezone, reasons, local_mask, fold)
    unreadable = utc.isna().to_numpy() & (reasons == "")
    for i in np.flatnonzero(unreadable):
        shown = text.iloc[i][:40]
        expected = fmt.timestamp_format or "ISO 8601"
        reasons[i] = f"timestamp {shown!r} in column {fmt.timestamp_column!r} is not {expected}"
    good = ~utc.isna().to_numpy()
    ms[good] = pd.DatetimeIndex(utc[good]).as_unit("ms").asi8
    return ms, reasons


def _localize(naive: pd.Series, zone: str, reasons, local_mask, fold: _FoldState) -> pd.Series:
    """Local wall times -> UTC; nonexistent times get a reason; ambiguous ones resolved by order."""
    summer = naive.dt.tz_localize(zone, ambiguous=True, nonexistent="NaT")
    winter = naive.dt.tz_localize(zone, ambiguous=False, nonexistent="NaT")
    positions = np.flatnonzero(local_mask)
    nonexistent = summer.isna().to_numpy() & naive.notna().to_numpy()
    for i in np.flatnonzero(nonexistent):
        reasons[positions[i]] = (
            f"local time {naive.iloc[i]} does not exist in {zone} (clocks went forward)"
        )
    ambiguous = (summer != winter).to_numpy() & ~nonexistent & naive.notna().to_numpy()
    take_winter = np.zeros(len(naive), dtype=bool)
    carried = fold.previous_local is not None  # the previous chunk ended inside the hour
    for i in np.flatnonzero(ambiguous):
        if not (ambiguous[i - 1] if i > 0 else carried):  # a new repeated hour begins
            fold.previous_local, fold.second_pass = None, False
        local = naive.iloc[i]
        if fold.previous_local is not None and local < fold.previous_local:
            fold.second_pass = True
        take_winter[i] = fold.second_pass
        fold.previous_local = local
    if len(naive) and not ambiguous[-1]:
        fold.previous_local, fold.second_pass = None, False
    if not ambiguous.any():
        return summer.dt.tz_convert("UTC")
    chosen = summer.where(~take_winter, winter)
    return chosen.dt.tz_convert("UTC")


def _plausible_range(role: str) -> tuple[float, float]:
    return ROLE_RANGES_SI.get(role, (-MAX_ABS_VALUE, MAX_ABS_VALUE))


def _decode_cells(raw: pd.Series, target: ColumnTarget, fmt: CsvFormat, atmosphere_Pa: float):
    """Raw cell strings -> (SI values, per-cell reason or "", empty mask)."""
    reasons = np.full(len(raw), "", dtype=object)
    if unit_kind(target.unit) == "status":
        text = raw.astype(str).str.strip()
        empty = text.isin(fmt.missing_values).to_numpy() | raw.isna().to_numpy()
        values = np.asarray(to_si(text.to_numpy(dtype=object), target.unit), dtype=float)
        bad_word = np.isnan(values) & ~empty
        for i in np.flatnonzero(bad_word):
            reasons[i] = f"{text.iloc[i][:40]!r} is not an on/off value"
        return values, reasons, empty
    text = raw if fmt.decimal == "." else raw.str.replace(fmt.decimal, ".", regex=False)
    # to_numeric runs in C and ignores surrounding blanks; only cells it cannot read are looked at.
    numbers = pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)
    values = np.asarray(to_si(numbers, target.unit, atmospheric_pressure=atmosphere_Pa))
    low, high = _plausible_range(target.role)
    unread = np.flatnonzero(np.isnan(numbers))
    empty = np.zeros(len(raw), dtype=bool)
    explicit_nan = np.zeros(len(raw), dtype=bool)
    if len(unread):
        unread_text = raw.iloc[unread].fillna("").astype(str).str.strip()
        empty[unread] = unread_text.isin(fmt.missing_values).to_numpy()
        explicit_nan[unread] = unread_text.str.lower().isin(("nan", "+nan", "-nan")).to_numpy()
    parse_failed = np.isnan(numbers) & ~empty
    not_finite = ~np.isfinite(values) & ~np.isnan(numbers)
    out_of_range = np.isfinite(values) & ((values < low) | (values > high)) & ~empty
    for i in np.flatnonzero(parse_failed | not_finite | out_of_range):
        cell = raw.iloc[i]
        if parse_failed[i] and not explicit_nan[i]:
            reasons[i] = f"{cell!r} is not a number"
        elif parse_failed[i] or not_finite[i]:
            reasons[i] = f"{cell!r} is not a finite number"
        else:
            reasons[i] = (
                f"{target.role} {values[i]:.6g} (SI, from {cell!r} {target.unit}) is outside "
                f"the plausible range {low:.6g} to {high:.6g}"
            )
    return values, reasons, empty


def _decode(frame, fmt, columns, atmosphere_Pa, fold) -> _Decoded:
    ts_ms, ts_reasons = _parse_timestamps(frame[fmt.timestamp_column], fmt, fold)
    good_ts = ts_reasons == ""
    problems = [_Problem(int(i), None, ts_reasons[i]) for i in np.flatnonzero(~good_ts)]
    point_ids, stamps, values, rows = [], [], [], []
    empty_cells = 0
    for column, target in columns.items():
        if column not in frame.columns:
            continue
        column_values, reasons, empty = _decode_cells(frame[column], target, fmt, atmosphere_Pa)
        empty_cells += int((empty & good_ts).sum())
        bad = (reasons != "") & good_ts
        for i in np.flatnonzero(bad):
            problems.append(_Problem(int(i), column, f"column {column!r}: {reasons[i]}"))
        keep = good_ts & ~empty & ~bad
        positions = np.flatnonzero(keep)
        point_ids.append(np.full(len(positions), target.point_id, dtype=np.int64))
        stamps.append(ts_ms[positions])
        values.append(column_values[positions])
        rows.append(positions)
    if not point_ids:
        empty_array = np.empty(0, dtype=np.int64)
        return _Decoded(empty_array, empty_array, np.empty(0), empty_array, problems, empty_cells)
    return _Decoded(
        np.concatenate(point_ids),
        np.concatenate(stamps),
        np.concatenate(values),
        np.concatenate(rows),
        problems,
        empty_cells,
    )


def _write(conn: Connection, decoded: _Decoded) -> int:
    stored = 0
    point_ids, stamps = decoded.point_ids.tolist(), decoded.ts_ms.tolist()
    values = decoded.values.tolist()
    for first in range(0, len(point_ids), _WRITE_BATCH):
        last = first + _WRITE_BATCH
        stored += write_readings(
            conn,
            list(zip(point_ids[first:last], stamps[first:last], values[first:last], strict=True)),
        )
    return stored


def _payload(frame: pd.DataFrame, row: int, columns: Iterable[str]) -> str:
    cells = {c: frame.iloc[row][c] for c in columns}
    return json.dumps({k: (None if pd.isna(v) else str(v)) for k, v in cells.items()})


def _line_numbers(count: int, next_line: int, skipped: list[int]) -> np.ndarray:
    """File line numbers of ``count`` records from ``next_line`` on, past the skipped lines."""
    candidates = np.arange(next_line, next_line + count + len(skipped))
    if skipped:
        candidates = candidates[~np.isin(candidates, skipped)]
    return candidates[:count]


def count_lines(path: Path) -> int:
    """Number of lines in a file (a last line without a line end counts)."""
    lines, last = 0, b"\n"
    with path.open("rb") as handle:
        while block := handle.read(1 << 20):
            lines += block.count(b"\n")
            last = block[-1:]
    return lines + (last != b"\n")


def _ends_with_newline(path: Path) -> bool:
    with path.open("rb") as handle:
        handle.seek(0, 2)
        if handle.tell() == 0:
            return True
        handle.seek(-1, 2)
        return handle.read(1) == b"\n"


def _read_lines(path: Path, numbers: set[int], encoding: str) -> dict[int, str]:
    found = {}
    with path.open(encoding=encoding, errors="replace", newline="") as handle:
        for number, line in enumerate(handle, start=1):
            if number in numbers:
                found[number] = line.rstrip("\r\n")
    return found


def import_csv(
    engine: Engine,
    path: Path | str,
    fmt: CsvFormat,
    columns: dict[str, ColumnTarget],
    atmosphere_Pa: float,
    site_id: int | None = None,
    progress: Callable[[int], None] | None = None,
) -> ImportResult:
    """Import one CSV file; see the module docstring.

    Parameters
    ----------
    columns : CSV column name -> the point it feeds.
    atmosphere_Pa : atmospheric pressure at the site [Pa], added to gauge pressures.
    progress : called with the number of data lines done so far, after each chunk.

    Raises
    ------
    CsvImportError
        When the timestamp column or every mapped column is missing, or no timestamp of the
        first chunk can be read (a wrong format or column: fix the site file, nothing is stored).
    """
    path = Path(path)
    origin = str(path.resolve())
    result = ImportResult()
    try:
        header = pd.read_csv(
            path, sep=fmt.delimiter, encoding=fmt.encoding, nrows=0, dtype=str
        ).columns.tolist()
    except (OSError, UnicodeDecodeError, pd.errors.ParserError) as exc:
        raise CsvImportError(f"{path}: cannot read the CSV header: {exc}") from None
    except pd.errors.EmptyDataError:
        raise CsvImportError(f"{path}: the file is empty") from None
    if fmt.timestamp_column not in header:
        raise CsvImportError(
            f"{path}: no timestamp column {fmt.timestamp_column!r} (columns: {', '.join(header)}); "
            "set csv.timestamp_column and csv.delimiter in the site file"
        )
    result.columns_used = [c for c in header if c in columns]
    result.columns_ignored = [c for c in header if c not in columns and c != fmt.timestamp_column]
    result.columns_missing = [c for c in columns if c not in header]
    if not result.columns_used:
        raise CsvImportError(
            f"{path}: none of the file's columns is mapped to a point (csv_column in the site "
            f"file); the file has: {', '.join(header)}"
        )
    truncated = not _ends_with_newline(path)
    total_lines = count_lines(path) if truncated else None

    skipped: list[int] = []
    next_line = 2
    fold = _FoldState()
    # All columns are read (not usecols): only then does a line with too many fields get noticed.
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", pd.errors.ParserWarning)
        reader = pd.read_csv(
            path,
            sep=fmt.delimiter,
            encoding=fmt.encoding,
            encoding_errors="replace",
            dtype=str,
            keep_default_na=False,
            na_filter=False,
            skip_blank_lines=False,
            on_bad_lines="warn",
            chunksize=fmt.chunk_rows,
        )
        first_chunk = True
        try:
            for frame in reader:
                skipped.extend(_take_skipped(caught))
                lines = _line_numbers(len(frame), next_line, sorted(skipped))
                next_line = int(lines[-1]) + 1 if len(lines) else next_line
                frame = frame.reset_index(drop=True)
                blank = (frame == "").all(axis=1).to_numpy()
                if truncated and total_lines in lines:
                    blank = blank | (lines == total_lines)
                decoded = _decode(
                    frame[~blank].reset_index(drop=True), fmt, columns, atmosphere_Pa, fold
                )
                kept_lines = lines[~blank]
                if first_chunk and len(kept_lines) and _no_timestamp_read(decoded, len(kept_lines)):
                    example = frame.loc[~blank, fmt.timestamp_column].iloc[0]
                    raise CsvImportError(
                        f"{path}: no timestamp in column {fmt.timestamp_column!r} could be read "
                        f"(first: {example!r}, expected {fmt.timestamp_format or 'ISO 8601'}); "
                        "fix csv.timestamp_format in the site file. Nothing was stored."
                    )
                first_chunk = False
                with engine.begin() as conn:
                    stored = _write(conn, decoded)
                    entries = list(
                        _chunk_entries(
                            frame[~blank],
                            kept_lines,
                            decoded,
                            fmt,
                            origin,
                            result.columns_used,
                            site_id,
                        )
                    )
                    if truncated and total_lines in lines:
                        entries.append(_truncated_entry(path, origin, total_lines, fmt, site_id))
                    result.quarantined += write_quarantine(conn, _new_entries(conn, entries))
                result.readings_stored += stored
                result.readings_already_stored += len(decoded.values) - stored
                result.cells_empty += decoded.empty_cells
                if len(decoded.ts_ms):
                    low, high = int(decoded.ts_ms.min()), int(decoded.ts_ms.max())
                    result.first_ms = low if result.first_ms is None else min(result.first_ms, low)
                    result.last_ms = high if result.last_ms is None else max(result.last_ms, high)
                result.lines = int(lines[-1]) - 1 if len(lines) else result.lines
                if progress is not None:
                    progress(result.lines)
        except pd.errors.ParserError as exc:
            raise CsvImportError(f"{path}: the CSV cannot be parsed further: {exc}") from None
        skipped.extend(_take_skipped(caught))
    if skipped:
        raw = _read_lines(path, set(skipped), fmt.encoding)
        entries = [
            QuarantineEntry(
                "csv",
                origin,
                number,
                raw.get(number, ""),
                "line has more fields than the header",
                site_id=site_id,
            )
            for number in sorted(set(skipped))
        ]
        with engine.begin() as conn:
            result.quarantined += write_quarantine(conn, _new_entries(conn, entries))
    return result


def _chunk_entries(frame, lines, decoded, fmt, origin, columns_used, site_id):
    frame = frame.reset_index(drop=True)
    for problem in decoded.problems:
        cells = [fmt.timestamp_column, *([problem.column] if problem.column else columns_used)]
        yield QuarantineEntry(
            "csv",
            origin,
            int(lines[problem.row]),
            _payload(frame, problem.row, cells),
            problem.reason,
            site_id=site_id,
        )


def _new_entries(conn: Connection, entries: list[QuarantineEntry]) -> list[QuarantineEntry]:
    """Drop entries already in quarantine (same file, line and reason): re-imports add nothing."""
    if not entries:
        return entries
    lines = [e.line for e in entries]
    known = set(
        conn.execute(
            select(Quarantine.line, Quarantine.reason).where(
                Quarantine.source == "csv",
                Quarantine.origin == entries[0].origin,
                Quarantine.line.between(min(lines), max(lines)),
            )
        ).all()
    )
    return [e for e in entries if (e.line, e.reason) not in known]


def _no_timestamp_read(decoded: _Decoded, rows: int) -> bool:
    line_problems = {p.row for p in decoded.problems if p.column is None}
    return len(line_problems) == rows


def _take_skipped(caught: list) -> list[int]:
    numbers = []
    for warning in caught:
        match = _SKIPPED_LINE.search(str(warning.message))
        if match:
            numbers.append(int(match.group(1)))
    caught.clear()
    return numbers


def _truncated_entry(path, origin, line, fmt, site_id) -> QuarantineEntry:
    raw = _read_lines(path, {line}, fmt.encoding).get(line, "")
    return QuarantineEntry(
        "csv",
        origin,
        line,
        raw,
        "last line has no line end: the file looks cut off, so the line was not stored",
        site_id=site_id,
    )


def reprocess_csv(
    engine: Engine,
    entries: list,
    fmt: CsvFormat,
    columns: dict[str, ColumnTarget],
    atmosphere_Pa: float,
) -> tuple[int, list[int]]:
    """Decode quarantined CSV cells again with the current configuration.

    ``entries`` are quarantine rows (``id``, ``payload``) whose payload is the JSON object of raw
    cells written by :func:`import_csv`. An entry whose cells all decode now is stored and marked
    reprocessed. Returns (readings newly stored, ids marked reprocessed).
    """
    records, ids = [], []
    for entry in entries:
        try:
            cells = json.loads(bytes(entry.payload).decode("utf-8"))
        except (UnicodeDecodeError, ValueError):
            continue  # a raw line (too many fields, cut off): only a fixed file can help
        if not isinstance(cells, dict) or fmt.timestamp_column not in cells:
            continue
        if not any(c in columns for c in cells if c != fmt.timestamp_column):
            continue
        records.append(cells)
        ids.append(entry.id)
    if not records:
        return 0, []
    frame = pd.DataFrame.from_records(records).fillna("").astype(str)
    decoded = _decode(frame, fmt, columns, atmosphere_Pa, _FoldState())
    failed_rows = {p.row for p in decoded.problems}
    for row, cells in enumerate(records):
        unmapped = [c for c in cells if c != fmt.timestamp_column and c not in columns]
        if unmapped:
            failed_rows.add(row)
    keep = ~np.isin(decoded.rows, list(failed_rows))
    decoded = _Decoded(
        decoded.point_ids[keep],
        decoded.ts_ms[keep],
        decoded.values[keep],
        decoded.rows[keep],
        [],
        0,
    )
    done = [ids[row] for row in range(len(records)) if row not in failed_rows]
    with engine.begin() as conn:
        stored = _write(conn, decoded)
        mark_reprocessed(conn, done)
    return stored, done


__all__ = [
    "ColumnTarget",
    "CsvFormat",
    "CsvImportError",
    "ImportResult",
    "count_lines",
    "import_csv",
    "reprocess_csv",
]
