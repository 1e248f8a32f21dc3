"""The columnar score table and its compact JSON form."""

from __future__ import annotations

import array
import base64
import copy
import zlib

import numpy as np
import pytest

from review_alloc.model import SCORE_ENCODING, ScoreTable


def _table() -> ScoreTable:
    return ScoreTable.from_arrays([2, 0, 1, 0], [1, 3, 0, 0], [0.5, 1.0, 0.0, 2.25])


def test_rows_are_sorted_by_pair_and_typed() -> None:
    table = _table()
    assert len(table) == 4
    assert table.reviewer.tolist() == [0, 0, 1, 2]
    assert table.paper.tolist() == [0, 3, 0, 1]
    assert table.value.tolist() == [2.25, 1.0, 0.0, 0.5]
    assert table.reviewer.dtype == np.int32 and table.paper.dtype == np.int32
    assert table.value.dtype == np.float64


def test_arrays_are_read_only_and_do_not_share_the_callers_memory() -> None:
    r = np.array([0, 1], dtype=np.int32)
    table = ScoreTable.from_arrays(r, np.array([0, 0], dtype=np.int32), np.array([1.0, 2.0]))
    r[0] = 5
    assert table.reviewer.tolist() == [0, 1]
    with pytest.raises(ValueError):
        table.value[0] = 3.0


def test_equality_ignores_input_order() -> None:
    other = ScoreTable.from_arrays([0, 0, 1, 2], [0, 3, 0, 1], [2.25, 1.0, 0.0, 0.5])
    assert _table() == other
    assert _table() != ScoreTable.from_arrays([0], [0], [2.25])
    assert ScoreTable.empty() == ScoreTable.from_arrays([], [], [])
    assert len(ScoreTable.empty()) == 0


@pytest.mark.parametrize(
    "reviewer, paper, value, message",
    [
        ([0, 1], [0], [1.0, 2.0], "must have one length"),
        ([0, -1], [0, 0], [1.0, 2.0], r"reviewer: row 1 has index -1"),
        ([0.0, 1.0], [0, 0], [1.0, 2.0], "expected whole-number indices"),
        ([0, 1], [0, 0], [1.0, -0.5], r"value: row 1 is -0.5"),
        ([0, 1], [0, 0], [np.nan, 1.0], r"value: row 0 is nan"),
        ([0, 1], [0, 0], [1.0, np.inf], r"value: row 1 is inf"),
        (
            [1, 0, 1],
            [4, 2, 4],
            [1.0, 2.0, 3.0],
            r"duplicate pair \(reviewer index 1, paper index 4\) in rows 0 and 2",
        ),
        ([[0]], [[0]], [[1.0]], "one-dimensional"),
    ],
)
def test_bad_rows_are_refused(reviewer: object, paper: object, value: object, message: str) -> None:
    with pytest.raises(ValueError, match=message):
        ScoreTable.from_arrays(reviewer, paper, value)


def test_lookup_get_and_rows_of_a_reviewer() -> None:
    table = _table()
    found = table.lookup([0, 2, 1, 3], [3, 1, 1, 0], default=-1.0)
    assert found.tolist() == [1.0, 0.5, -1.0, -1.0]
    assert table.get(0, 0) == 2.25
    assert table.get(5, 5) is None
    papers, values = table.of_reviewer(0)
    assert papers.tolist() == [0, 3] and values.tolist() == [2.25, 1.0]
    assert table.as_dict() == {(0, 0): 2.25, (0, 3): 1.0, (1, 0): 0.0, (2, 1): 0.5}
    assert np.isnan(ScoreTable.empty().lookup([0], [0])).all()


def test_sorted_keys_for_joins() -> None:
    table = _table()
    assert table.sorted_keys(4).tolist() == [0, 3, 4, 9]
    keys = table.sorted_keys()
    assert np.all(keys[1:] > keys[:-1])
    with pytest.raises(ValueError, match="must exceed"):
        table.sorted_keys(3)


def test_updated_adds_and_replaces_rows() -> None:
    table = _table().updated([0, 3], [3, 3], [9.0, 1.5])
    assert table.as_dict() == {(0, 0): 2.25, (0, 3): 9.0, (1, 0): 0.0, (2, 1): 0.5, (3, 3): 1.5}
    assert len(_table()) == 4


def test_copies_share_the_read_only_table() -> None:
    table = _table()
    assert copy.copy(table) is table and copy.deepcopy(table) is table


def test_document_round_trip_and_independent_decoding() -> None:
    table = _table()
    document = table.to_document()
    assert document["encoding"] == SCORE_ENCODING
    assert document["count"] == 4
    assert ScoreTable.from_document(document) == table
    # Independent check with the standard library alone (zlib, base64, array): the columns are
    # little-endian int32/int32/float64 in row order, as the encoding string says.
    reviewer = array.array("i", zlib.decompress(base64.b64decode(document["reviewer"])))
    value = array.array("d", zlib.decompress(base64.b64decode(document["value"])))
    assert reviewer.itemsize == 4 and value.itemsize == 8
    assert list(reviewer) == [0, 0, 1, 2]
    assert list(value) == [2.25, 1.0, 0.0, 0.5]


def _pack(values: np.ndarray) -> str:
    return base64.b64encode(zlib.compress(values.tobytes())).decode("ascii")


@pytest.mark.parametrize(
    "change, message",
    [
        ({"encoding": "gzip"}, "encoding: 'gzip' is not supported"),
        ({"count": -1}, "count: -1 is not a whole number"),
        ({"count": 5}, "reviewer: holds 16 bytes; count 5 needs 20"),
        ({"count": 3}, "reviewer: holds more than the 12 bytes"),
        ({"paper": "!!!"}, "paper: not valid base64"),
        ({"value": base64.b64encode(b"plain bytes").decode()}, "value: not valid zlib data"),
        ({"value": 7}, "value: expected a base64 string"),
        ({"extra": 1}, "unknown extra"),
        ({"value": None, "drop": "value"}, "missing value"),
        ({"value": _pack(np.array([1.0, -2.0, 0.0, 0.0]))}, r"value: row 1 is -2.0"),
        (
            {
                "paper": _pack(np.array([0, 0, 0, 0], dtype="<i4")),
                "reviewer": _pack(np.array([1, 1, 2, 3], dtype="<i4")),
            },
            "duplicate pair",
        ),
    ],
)
def test_bad_documents_are_refused(change: dict[str, object], message: str) -> None:
    document = _table().to_document()
    drop = change.pop("drop", None)
    document.update(change)
    if drop:
        del document[str(drop)]
    with pytest.raises(ValueError, match=message):
        ScoreTable.from_document(document)


def test_a_truncated_stream_is_refused() -> None:
    document = _table().to_document()
    packed = base64.b64decode(document["value"])
    document["value"] = base64.b64encode(packed[:-6]).decode()
    with pytest.raises(ValueError, match="value: "):
        ScoreTable.from_document(document)


def test_a_non_object_is_refused() -> None:
    with pytest.raises(ValueError, match="expected an object"):
        ScoreTable.from_document([1, 2, 3])
