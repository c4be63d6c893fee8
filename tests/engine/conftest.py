"""Fixtures for the engine tests (helpers live in ``engine_helpers``)."""

from __future__ import annotations

import pytest

from gisrun.engine import ENGINES


@pytest.fixture(params=sorted(ENGINES))
def method(request: pytest.FixtureRequest) -> str:
    """Every registered loss method."""
    return request.param
