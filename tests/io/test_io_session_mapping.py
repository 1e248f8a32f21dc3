"""Anything the session refuses after the file checks is still placed at a file and line."""

from __future__ import annotations

import pytest
from pydantic import ValidationError

from review_alloc.io.importer import _session_lines
from review_alloc.model import Session


def test_session_errors_are_mapped_back_to_file_lines() -> None:
    with pytest.raises(ValidationError) as caught:
        Session.model_validate(
            {
                "name": "Mapped",
                "papers": [{"id": "P1"}, {"id": "P1"}],
                "reviewers": [{"id": "R1", "cap": 2, "floor": 3}],
                "conflicts": [{"reviewer": "R1", "paper": "P9"}],
            }
        )
    sources = {
        "papers": ("papers.csv", [2, 5]),
        "reviewers": ("reviewers.csv", [4]),
        "conflicts": ("conflicts.csv", [3]),
    }
    assert _session_lines(caught.value, sources) == [
        "papers.csv: line 5: column 'paper_id': duplicate paper id 'P1' (first at papers.0)",
        "reviewers.csv: line 4: column 'floor': 3 exceeds cap 2",
        "conflicts.csv: line 3: column 'paper_id': unknown paper 'P9'",
    ]
