"""Read a labelled evaluation set (CSV or JSON Lines) and report its bad rows.

Row numbers are the file's line numbers, counted from 1 (in a CSV the header is
line 1, so the first utterance is line 2, as a spreadsheet shows it; a CSV record
whose quoted text spans several lines is numbered by its first line). A row is
bad when its bytes are not UTF-8, when it cannot be parsed, when its text is
missing or blank, when its label is missing, or when its label is not one the
model knows. Bad rows are either skipped (and listed) or make the whole read
fail, as the caller chooses.
"""

from __future__ import annotations

import csv
import io
import json
from collections import Counter
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

from inspector import formatting
from inspector.checkpoint.tokens import text_problem
from inspector.errors import HeadcountError

BadRowPolicy = Literal["skip", "fail"]
DataFormat = Literal["csv", "jsonl"]

FORMATS: tuple[str, ...] = ("csv", "jsonl")
BAD_ROW_POLICIES: tuple[str, ...] = ("skip", "fail")
_SUFFIXES: dict[str, DataFormat] = {".csv": "csv", ".jsonl": "jsonl", ".ndjson": "jsonl"}
_SHOWN_IN_ERROR = 5


@dataclass(frozen=True)
class BadRow:
    """One row that was not used, and why."""

    row: int
    """Line number in the file (1-based)."""
    reason: str


@dataclass
class LabelledSet:
    """The usable utterances of an evaluation file, with what was left out."""

    path: Path
    format: DataFormat
    texts: list[str]
    labels: list[str]
    rows: list[int]
    """Line number of each utterance in the file."""
    bad_rows: list[BadRow] = field(default_factory=list)
    unknown_labels: dict[str, int] = field(default_factory=dict)
    """Labels the model does not know, with how many rows carry each."""

    def __len__(self) -> int:
        return len(self.texts)

    def subset(self, index: Sequence[int]) -> LabelledSet:
        """The utterances at ``index`` (bad-row records are kept as they are)."""
        return LabelledSet(
            path=self.path,
            format=self.format,
            texts=[self.texts[i] for i in index],
            labels=[self.labels[i] for i in index],
            rows=[self.rows[i] for i in index],
            bad_rows=list(self.bad_rows),
            unknown_labels=dict(self.unknown_labels),
        )


def detect_format(path: Path, fmt: str | None = None) -> DataFormat:
    """``fmt`` if given, else the format named by the file suffix (.csv, .jsonl, .ndjson)."""
    if fmt not in (None, "auto"):
        if fmt not in FORMATS:
            raise HeadcountError(f"unknown data format '{fmt}' (use one of: {', '.join(FORMATS)})")
        return fmt  # type: ignore[return-value]
    try:
        return _SUFFIXES[path.suffix.lower()]
    except KeyError:
        raise HeadcountError(
            f"{path.name}: cannot tell the format from the suffix '{path.suffix}'; "
            "name it .csv or .jsonl, or give the format"
        ) from None


def _decoded_lines(raw: bytes) -> tuple[list[str], set[int]]:
    """Split ``raw`` into lines (endings kept) decoded as UTF-8; return the bad line numbers too."""
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    lines, bad = [], set()
    for number, chunk in enumerate(raw.splitlines(keepends=True), start=1):
        try:
            lines.append(chunk.decode("utf-8"))
        except UnicodeDecodeError:
            bad.add(number)
            lines.append(chunk.decode("utf-8", errors="replace"))
    return lines, bad


def _csv_records(
    lines: list[str], text_field: str, label_field: str, name: str
) -> Iterator[tuple[int, int, object, object, str | None]]:
    """Yield (first line, last line, text, label, parse problem) per CSV record after the header."""
    reader = csv.reader(io.StringIO("".join(lines), newline=""))
    try:
        header = next(reader)
    except StopIteration:
        raise HeadcountError(f"{name}: the file is empty") from None
    except csv.Error as exc:
        raise HeadcountError(f"{name}: unreadable CSV header ({exc})") from None
    header = [h.strip() for h in header]
    missing = [f for f in (text_field, label_field) if f not in header]
    if missing:
        raise HeadcountError(
            f"{name}: no column {', '.join(repr(m) for m in missing)} (columns: {', '.join(header)})"
        )
    t_col, l_col = header.index(text_field), header.index(label_field)
    last = reader.line_num
    while True:
        first = last + 1
        try:
            record = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            last = reader.line_num
            yield first, last, None, None, f"unreadable CSV ({exc})"
            continue
        last = reader.line_num
        if not record or all(not c.strip() for c in record):
            continue
        text = record[t_col] if t_col < len(record) else None
        label = record[l_col] if l_col < len(record) else None
        yield first, last, text, label, None


def _jsonl_records(
    lines: list[str], text_field: str, label_field: str
) -> Iterator[tuple[int, int, object, object, str | None]]:
    for number, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        try:
            obj = json.loads(line)
        except json.JSONDecodeError as exc:
            yield number, number, None, None, f"not valid JSON ({exc.msg})"
            continue
        except RecursionError:
            yield number, number, None, None, "not valid JSON (nested too deeply)"
            continue
        except ValueError as exc:  # e.g. an integer longer than Python converts
            yield number, number, None, None, f"not valid JSON ({str(exc).splitlines()[0]})"
            continue
        if not isinstance(obj, dict):
            yield number, number, None, None, "not a JSON object"
            continue
        yield number, number, obj.get(text_field), obj.get(label_field), None


def _label_text(label: object) -> str | None:
    if label is None or isinstance(label, (dict, list)):
        return None
    if isinstance(label, float) and label.is_integer():
        label = int(label)
    text = str(label).strip()
    return text or None


def read_labelled(
    path: str | Path,
    *,
    text_field: str = "text",
    label_field: str = "label",
    fmt: str | None = None,
    known_labels: Sequence[str] | None = None,
    on_bad_row: str = "skip",
) -> LabelledSet:
    """Read a labelled evaluation set.

    Parameters
    ----------
    path : path
        A ``.csv`` file with a header row, or a ``.jsonl`` file with one JSON
        object per line.
    text_field, label_field : str
        Names of the column (CSV) or key (JSONL) holding the utterance and its label.
    fmt : {'csv', 'jsonl'} or None
        Format; by default taken from the suffix.
    known_labels : sequence of str, optional
        The model's labels. Rows with any other label are bad rows and their
        labels are counted in ``unknown_labels``.
    on_bad_row : {'skip', 'fail'}
        ``skip`` leaves bad rows out and lists them; ``fail`` raises on the first
        read if any row is bad (the message names the first few).

    Returns
    -------
    LabelledSet

    Raises
    ------
    HeadcountError
        Missing or unreadable file, missing column, bad rows under ``fail``, or
        no usable row at all.
    """
    path = Path(path).expanduser()
    if on_bad_row not in BAD_ROW_POLICIES:
        raise HeadcountError(f"unknown bad-row policy '{on_bad_row}' (use skip or fail)")
    if path.is_dir():
        raise HeadcountError(f"{path}: is a folder, not a data file")
    if not path.is_file():
        raise HeadcountError(f"{path}: no such data file")
    data_format = detect_format(path, fmt)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise HeadcountError(f"{path}: cannot read ({exc.strerror or exc})") from None
    lines, bad_lines = _decoded_lines(raw)
    if data_format == "csv":
        records = _csv_records(lines, text_field, label_field, path.name)
    else:
        records = _jsonl_records(lines, text_field, label_field)
    known = None if known_labels is None else set(known_labels)
    out = LabelledSet(path=path, format=data_format, texts=[], labels=[], rows=[])
    unknown: Counter[str] = Counter()
    for first, last, text, label, problem in records:
        reason = problem
        if reason is None and any(n in bad_lines for n in range(first, last + 1)):
            reason = "bad encoding (not UTF-8)"
        label_name = _label_text(label)
        if reason is None and (not isinstance(text, str) or not text.strip()):
            reason = f"missing text ('{text_field}')"
        elif reason is None and text_problem(text):
            reason = f"unusable text ('{text_field}'): {text_problem(text)}"
        elif reason is None and label_name is None:
            reason = f"missing label ('{label_field}')"
        elif reason is None and known is not None and label_name not in known:
            reason = f"unknown label '{label_name}'"
            unknown[label_name] += 1
        if reason is not None:
            out.bad_rows.append(BadRow(first, reason))
            continue
        out.texts.append(text.strip())
        out.labels.append(label_name)
        out.rows.append(first)
    out.unknown_labels = dict(sorted(unknown.items()))
    if out.bad_rows and on_bad_row == "fail":
        shown = "; ".join(f"line {b.row}: {b.reason}" for b in out.bad_rows[:_SHOWN_IN_ERROR])
        more = len(out.bad_rows) - _SHOWN_IN_ERROR
        tail = f"; and {more} more" if more > 0 else ""
        raise HeadcountError(f"{path.name}: {formatting.count(len(out.bad_rows), 'bad row')}: {shown}{tail}")
    if not out.texts:
        why = ""
        if out.bad_rows:
            first = out.bad_rows[0]
            why = f" ({formatting.count(len(out.bad_rows), 'bad row')}, first: line {first.row}: {first.reason})"
        raise HeadcountError(f"{path.name}: no usable utterance" + why)
    return out
