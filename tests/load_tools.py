"""A check shared by the tests of schema.DirectLoad (single request and batch item)."""
from __future__ import annotations

import copy

import numpy as np
import pytest
from marshmallow import Schema, ValidationError


def assert_direct_load_agrees(schema: Schema, direct, body: dict, direct_only: bool) -> None:
    """``direct.load(body)`` equals ``schema.load(body)``: the same values and types, or the same errors.

    With ``direct_only`` the direct path must answer on its own: its fallback to the schema's
    load is cut, so a body it should handle but silently hands over fails the check.
    """
    try:
        expected = schema.load(body)
    except ValidationError as err:
        with pytest.raises(ValidationError) as got:
            direct.load(body)
        assert got.value.messages == err.messages
        return
    if direct_only:
        direct = copy.copy(direct)
        direct.schema = None
    got = direct.load(body)
    assert set(got) == set(expected)
    for key, value in expected.items():
        if isinstance(value, np.ndarray):
            np.testing.assert_array_equal(got[key], value)
            assert got[key].dtype == value.dtype
        else:
            assert got[key] == value and type(got[key]) is type(value), key
