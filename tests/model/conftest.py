"""Fixtures of the model tests."""

from __future__ import annotations

import pytest
from model_samples import make_session

from review_alloc.model import Session


@pytest.fixture
def session() -> Session:
    """A fresh copy of the small session."""
    return make_session()
