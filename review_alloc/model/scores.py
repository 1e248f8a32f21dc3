"""The score table: columnar (reviewer, paper, value) rows, stored compactly in the session file.

A session may hold millions of scores, so they are three numpy arrays rather than one object
per row. In the JSON document each array is written little-endian, zlib-compressed and
base64-encoded. Rows are kept sorted by (reviewer index, paper index), which makes equality a
comparison of arrays, lookups a binary search, and the index columns compress well.
"""

from __future__ import annotations

import base64
import binascii
import zlib
from typing import Any

import numpy as np
from pydantic import GetCoreSchemaHandler, GetJsonSchemaHandler
from pydantic.json_schema import JsonSchemaValue
from pydantic_core import core_schema

from review_alloc.model.limits import MAX_SCORE

ENCODING = "zlib+base64, little-endian int32/int32/float64"
"""The one encoding this version writes and reads, recorded in the document."""

# Level 1 was measured at about a third of the time of level 6 on 3 million rows, for a file
# about 15% larger; saves stay near a second.
_COMPRESSION_LEVEL = 1
_INDEX_LIMIT = np.iinfo(np.int32).max
_COLUMNS: tuple[tuple[str, str], ...] = (("reviewer", "<i4"), ("paper", "<i4"), ("value", "<f8"))
_DOCUMENT_KEYS = frozenset({"encoding", "count", *(name for name, _ in _COLUMNS)})


def _index_column(name: str, data: Any) -> np.ndarray:
    array = np.asarray(data)
    if array.ndim != 1:
        raise ValueError(f"{name}: expected a one-dimensional array, got {array.ndim} dimensions")
    if array.size == 0:
        return np.zeros(0, dtype=np.int32)
    if array.dtype.kind not in "iu":
        raise ValueError(f"{name}: expected whole-number indices, got {array.dtype}")
    low, high = int(array.min()), int(array.max())
    if low < 0:
        row = int(np.argmax(array < 0))
        raise ValueError(f"{name}: row {row} has index {int(array[row])}; indices must be >= 0")
    if high > _INDEX_LIMIT:
        row = int(np.argmax(array > _INDEX_LIMIT))
        raise ValueError(f"{name}: row {row} has index {int(array[row])}, above {_INDEX_LIMIT}")
    return array.astype(np.int32, copy=False)


def _value_column(data: Any) -> np.ndarray:
    array = np.asarray(data)
    if array.ndim != 1:
        raise ValueError(f"value: expected a one-dimensional array, got {array.ndim} dimensions")
    if array.size == 0:
        return np.zeros(0, dtype=np.float64)
    if array.dtype.kind not in "iuf":
        raise ValueError(f"value: expected numbers, got {array.dtype}")
    array = array.astype(np.float64, copy=False)
    bad = ~np.isfinite(array) | (array < 0) | (array > MAX_SCORE)
    if bad.any():
        row = int(np.argmax(bad))
        raise ValueError(
            f"value: row {row} is {float(array[row])!r}; a score must be a finite number "
            f"from 0 to {MAX_SCORE:g}"
        )
    return array


def _pair_keys(reviewer: np.ndarray, paper: np.ndarray) -> np.ndarray:
    # Reviewer in the high 32 bits: sorting the keys sorts by (reviewer, paper).
    return (reviewer.astype(np.int64) << 32) | paper.astype(np.int64)


def _frozen(array: np.ndarray) -> np.ndarray:
    array.flags.writeable = False
    return array


class ScoreTable:
    """Scores as three parallel arrays: `reviewer`, `paper` (int32 positions), `value` (float64).

    `reviewer` and `paper` index `Session.reviewers` and `Session.papers`; rows are sorted by
    (reviewer, paper), each pair appears at most once, and values are finite, >= 0 and at most
    `MAX_SCORE` (higher is a better fit). The arrays are read-only: a table is a value, changed
    by making a new one.
    """

    __slots__ = ("_reviewer", "_paper", "_value", "_keys")

    def __init__(self, reviewer: Any, paper: Any, value: Any) -> None:
        r = _index_column("reviewer", reviewer)
        p = _index_column("paper", paper)
        v = _value_column(value)
        if not (len(r) == len(p) == len(v)):
            raise ValueError(
                f"reviewer, paper and value must have one length, got {len(r)}, {len(p)}, {len(v)}"
            )
        keys = _pair_keys(r, p)
        if len(keys) > 1 and not bool(np.all(keys[1:] > keys[:-1])):
            order = np.argsort(keys, kind="stable")
            keys = keys[order]
            same = np.flatnonzero(keys[1:] == keys[:-1])
            if len(same):
                first, second = sorted((int(order[same[0]]), int(order[same[0] + 1])))
                raise ValueError(
                    f"duplicate pair (reviewer index {int(r[first])}, paper index "
                    f"{int(p[first])}) in rows {first} and {second}"
                )
            r, p, v = r[order], p[order], v[order]
        else:
            # Copy so that the caller's arrays stay theirs and ours can be made read-only.
            r, p, v = r.copy(), p.copy(), v.copy()
        self._reviewer = _frozen(r)
        self._paper = _frozen(p)
        self._value = _frozen(v)
        self._keys = _frozen(keys)

    @classmethod
    def from_arrays(cls, reviewer: Any, paper: Any, value: Any) -> ScoreTable:
        """Build a table from three equal-length arrays; raises ValueError on bad rows."""
        return cls(reviewer, paper, value)

    @classmethod
    def empty(cls) -> ScoreTable:
        """A table without rows."""
        return cls(np.zeros(0, np.int32), np.zeros(0, np.int32), np.zeros(0, np.float64))

    @property
    def reviewer(self) -> np.ndarray:
        """Reviewer positions (int32, read-only)."""
        return self._reviewer

    @property
    def paper(self) -> np.ndarray:
        """Paper positions (int32, read-only)."""
        return self._paper

    @property
    def value(self) -> np.ndarray:
        """Scores (float64, read-only)."""
        return self._value

    def __len__(self) -> int:
        return len(self._value)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, ScoreTable):
            return NotImplemented
        return (
            np.array_equal(self._reviewer, other._reviewer)
            and np.array_equal(self._paper, other._paper)
            and np.array_equal(self._value, other._value)
        )

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"ScoreTable({len(self)} rows)"

    def __copy__(self) -> ScoreTable:
        return self

    def __deepcopy__(self, memo: dict[int, Any]) -> ScoreTable:
        # Read-only arrays: sharing them is safe and spares copying millions of rows.
        return self

    def sorted_keys(self, n_papers: int | None = None) -> np.ndarray:
        """Pair keys in row order: `reviewer * n_papers + paper`, else `reviewer << 32 | paper`.

        With `n_papers` (which must exceed every paper index) the keys match those of other
        arrays built the same way, for joins with `np.searchsorted` or `np.isin`.
        """
        if n_papers is None:
            return self._keys
        if len(self) and int(self._paper.max()) >= n_papers:
            raise ValueError(f"n_papers {n_papers} must exceed the largest paper index")
        return self._reviewer.astype(np.int64) * n_papers + self._paper

    def lookup(self, reviewer: Any, paper: Any, default: float = float("nan")) -> np.ndarray:
        """Scores of many (reviewer, paper) pairs at once; `default` where a pair has no row."""
        r = np.asarray(reviewer, dtype=np.int64)
        p = np.asarray(paper, dtype=np.int64)
        wanted = (r << 32) | p
        if len(self) == 0:
            return np.full(wanted.shape, default, dtype=np.float64)
        pos = np.minimum(np.searchsorted(self._keys, wanted), len(self) - 1)
        return np.where(self._keys[pos] == wanted, self._value[pos], default)

    def get(self, reviewer: int, paper: int) -> float | None:
        """The score of one pair, or None when it has no row."""
        found = self.lookup([reviewer], [paper])[0]
        return None if np.isnan(found) else float(found)

    def of_reviewer(self, reviewer: int) -> tuple[np.ndarray, np.ndarray]:
        """The (paper positions, values) scored for one reviewer, by paper position."""
        start, stop = np.searchsorted(self._reviewer, [reviewer, reviewer + 1])
        return self._paper[start:stop], self._value[start:stop]

    def as_dict(self) -> dict[tuple[int, int], float]:
        """Map (reviewer, paper) to value; for small tables only (one Python object per row)."""
        return dict(
            zip(
                zip(self._reviewer.tolist(), self._paper.tolist(), strict=True),
                self._value.tolist(),
                strict=True,
            )
        )

    def updated(self, reviewer: Any, paper: Any, value: Any) -> ScoreTable:
        """A new table with these rows added, replacing the rows of the same pairs."""
        change = ScoreTable(reviewer, paper, value)
        keep = ~np.isin(self._keys, change._keys, assume_unique=True)
        return ScoreTable(
            np.concatenate([self._reviewer[keep], change._reviewer]),
            np.concatenate([self._paper[keep], change._paper]),
            np.concatenate([self._value[keep], change._value]),
        )

    def to_document(self) -> dict[str, Any]:
        """The JSON form: encoding, count, and each column compressed and base64-encoded."""
        document: dict[str, Any] = {"encoding": ENCODING, "count": len(self)}
        for name, dtype in _COLUMNS:
            raw = getattr(self, name).astype(dtype, copy=False).tobytes()
            packed = zlib.compress(raw, _COMPRESSION_LEVEL)
            document[name] = base64.b64encode(packed).decode("ascii")
        return document

    @classmethod
    def from_document(cls, document: Any) -> ScoreTable:
        """Read the JSON form written by `to_document`; raises ValueError naming the bad part."""
        if isinstance(document, ScoreTable):
            return document
        if not isinstance(document, dict):
            raise ValueError("expected an object with keys encoding, count, reviewer, paper, value")
        missing = sorted(_DOCUMENT_KEYS - document.keys())
        extra = sorted(set(document) - _DOCUMENT_KEYS)
        if missing or extra:
            parts = []
            if missing:
                parts.append("missing " + ", ".join(missing))
            if extra:
                parts.append("unknown " + ", ".join(map(str, extra)))
            raise ValueError("; ".join(parts))
        if document["encoding"] != ENCODING:
            raise ValueError(
                f"encoding: {document['encoding']!r} is not supported; expected {ENCODING!r}"
            )
        count = document["count"]
        if isinstance(count, bool) or not isinstance(count, int) or not 0 <= count <= _INDEX_LIMIT:
            raise ValueError(f"count: {count!r} is not a whole number from 0 to {_INDEX_LIMIT}")
        columns = [_unpack(name, document[name], count, dtype) for name, dtype in _COLUMNS]
        return cls(*columns)

    @classmethod
    def __get_pydantic_core_schema__(
        cls, source: Any, handler: GetCoreSchemaHandler
    ) -> core_schema.CoreSchema:
        """Validate from a table or its JSON form; serialise to the JSON form in JSON mode."""
        return core_schema.no_info_plain_validator_function(
            cls.from_document,
            serialization=core_schema.plain_serializer_function_ser_schema(
                lambda table: table.to_document(), when_used="json"
            ),
        )

    @classmethod
    def __get_pydantic_json_schema__(
        cls, schema: core_schema.CoreSchema, handler: GetJsonSchemaHandler
    ) -> JsonSchemaValue:
        """Describe the compact JSON form."""
        column = {"type": "string", "contentEncoding": "base64"}
        return {
            "title": "ScoreTable",
            "description": (
                "Score rows as three columns (reviewer position, paper position, value), "
                "each little-endian, zlib-compressed, base64-encoded; rows sorted by pair."
            ),
            "type": "object",
            "properties": {
                "encoding": {"type": "string", "const": ENCODING},
                "count": {"type": "integer", "minimum": 0},
                "reviewer": {**column, "description": "int32 positions in reviewers"},
                "paper": {**column, "description": "int32 positions in papers"},
                "value": {**column, "description": "float64 scores, finite and >= 0"},
            },
            "required": ["encoding", "count", "reviewer", "paper", "value"],
            "additionalProperties": False,
        }


def _unpack(name: str, text: Any, count: int, dtype: str) -> np.ndarray:
    if not isinstance(text, str):
        raise ValueError(f"{name}: expected a base64 string")
    try:
        packed = binascii.a2b_base64(text, strict_mode=True)
    except binascii.Error as error:
        raise ValueError(f"{name}: not valid base64 ({error})") from None
    expected = count * np.dtype(dtype).itemsize
    inflater = zlib.decompressobj()
    try:
        # Bounded so that a corrupt or hostile file cannot inflate past the size it claims.
        raw = inflater.decompress(packed, expected + 1)
    except zlib.error as error:
        raise ValueError(f"{name}: not valid zlib data ({error})") from None
    if len(raw) > expected or inflater.unconsumed_tail:
        raise ValueError(f"{name}: holds more than the {expected} bytes that count {count} needs")
    if len(raw) < expected:
        raise ValueError(f"{name}: holds {len(raw)} bytes; count {count} needs {expected}")
    if not inflater.eof:
        raise ValueError(f"{name}: the compressed data is cut short")
    return np.frombuffer(raw, dtype=dtype).astype(dtype[1:], copy=True)
