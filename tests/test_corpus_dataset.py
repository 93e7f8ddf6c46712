"""Reading labelled evaluation sets: formats, bad rows by line number, unknown labels."""

from __future__ import annotations

import csv
import json

import pytest

from inspector.corpus.dataset import read_labelled
from inspector.errors import HeadcountError
from tests.corpus_models import INTENTS, UTTERANCES, write_csv, write_jsonl


def test_csv_and_jsonl_read_the_same_utterances(tmp_path):
    """Both formats give the same texts, labels and line numbers.

    Reference: RFC 4180 (CSV, header on line 1) and the JSON Lines convention (one
    object per line); written here with Python's csv and json modules.
    """
    a = read_labelled(write_csv(tmp_path / "set.csv", UTTERANCES), known_labels=INTENTS)
    b = read_labelled(write_jsonl(tmp_path / "set.jsonl", UTTERANCES), known_labels=INTENTS)
    assert a.format == "csv" and b.format == "jsonl"
    assert a.texts == b.texts == [t for t, _ in UTTERANCES]
    assert a.labels == b.labels == [lab for _, lab in UTTERANCES]
    assert a.rows == list(range(2, len(UTTERANCES) + 2))  # CSV header is line 1
    assert b.rows == list(range(1, len(UTTERANCES) + 1))
    assert not a.bad_rows and not b.bad_rows


def test_bad_rows_are_reported_by_line_number_and_unknown_labels_listed(tmp_path):
    """Missing text, missing label, unknown label and bad UTF-8 are each reported on their own line.

    Reference: UTF-8 validity per RFC 3629 (a lone 0xFF byte is never valid); line
    numbers counted by hand from the file written below.
    """
    path = tmp_path / "messy.csv"
    lines = [
        b"text,label\n",  # 1
        b"book the 9am crossing,book_crossing\n",  # 2 ok
        b",timetable\n",  # 3 missing text
        b"when is the last boat,\n",  # 4 missing label
        b"can I bring a parrot,parrot_policy\n",  # 5 unknown label
        b"caf\xff menu on board,timetable\n",  # 6 bad encoding
        b'"a quoted\ntwo-line text",cancel_booking\n',  # 7-8 ok (one record over two lines)
        b"refund for my cancelled trip,refund_status\n",  # 9 unknown label
        b"another parrot question,parrot_policy\n",  # 10 unknown label
        b"   ,timetable\n",  # 11 blank text
        b"when does the ferry run,timetable\n",  # 12 ok
    ]
    path.write_bytes(b"".join(lines))
    got = read_labelled(path, known_labels=INTENTS)
    assert got.rows == [2, 7, 12]
    assert got.texts[1] == "a quoted\ntwo-line text"
    reasons = {b.row: b.reason for b in got.bad_rows}
    assert sorted(reasons) == [3, 4, 5, 6, 9, 10, 11]
    assert "missing text" in reasons[3] and "missing text" in reasons[11]
    assert "missing label" in reasons[4]
    assert "unknown label 'parrot_policy'" in reasons[5]
    assert "encoding" in reasons[6]
    assert got.unknown_labels == {"parrot_policy": 2, "refund_status": 1}


def test_fail_policy_names_the_bad_rows(tmp_path):
    """With on_bad_row='fail' the one-line error names the offending lines.

    Reference: common practice, no source (fail-fast input validation).
    """
    path = write_csv(tmp_path / "set.csv", [("fine", "timetable"), ("", "timetable"), ("x", "nope")])
    with pytest.raises(HeadcountError) as info:
        read_labelled(path, known_labels=INTENTS, on_bad_row="fail")
    msg = str(info.value)
    assert "2 bad rows" in msg and "line 3" in msg and "line 4" in msg and "\n" not in msg


def test_jsonl_field_names_and_broken_lines(tmp_path):
    """Custom field names; a line that is not JSON or not an object is a bad row; numeric labels become text.

    Reference: RFC 8259 (JSON) for what parses; JSON Lines convention for one object per line.
    """
    path = tmp_path / "set.jsonl"
    path.write_text(
        "\n".join(
            [
                json.dumps({"utterance": "when is the first boat", "intent": "timetable"}),
                "{not json",
                json.dumps(["a", "list"]),
                "",
                json.dumps({"utterance": "can my cat travel", "intent": "cancel_booking"}),
                json.dumps({"utterance": "label is a number", "intent": 3}),
            ]
        )
        + "\n",
        encoding="utf-8",
    )
    got = read_labelled(path, text_field="utterance", label_field="intent", known_labels=[*INTENTS, "3"])
    assert got.rows == [1, 5, 6]
    assert got.labels == ["timetable", "cancel_booking", "3"]
    assert {b.row for b in got.bad_rows} == {2, 3}


def test_user_errors_are_one_line(tmp_path):
    """Missing file, unknown suffix, missing column and an empty result raise HeadcountError.

    Reference: common practice, no source.
    """
    with pytest.raises(HeadcountError, match="no such data file"):
        read_labelled(tmp_path / "nope.csv")
    (tmp_path / "set.txt").write_text("text,label\nhi,timetable\n", encoding="utf-8")
    with pytest.raises(HeadcountError, match="suffix"):
        read_labelled(tmp_path / "set.txt")
    assert len(read_labelled(tmp_path / "set.txt", fmt="csv")) == 1
    with open(tmp_path / "cols.csv", "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows([["sentence", "label"], ["hi", "timetable"]])
    with pytest.raises(HeadcountError, match="no column 'text'"):
        read_labelled(tmp_path / "cols.csv")
    only_bad = write_csv(tmp_path / "bad.csv", [("x", "nope")])
    with pytest.raises(HeadcountError, match="no usable utterance"):
        read_labelled(only_bad, known_labels=INTENTS)
