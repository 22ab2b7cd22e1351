"""The test set-up itself: when a run counts as CI, and the Hypothesis profile it selects."""

from __future__ import annotations

import os

import pytest
from hypothesis import settings

from ci_env import in_ci


@pytest.mark.parametrize("value, expected", [
    ("true", True), ("True", True), ("1", True), ("yes", True), ("github", True),
    ("", False), ("  ", False), ("false", False), ("FALSE", False), ("0", False), (None, False),
])
def test_what_counts_as_ci(value, expected):
    assert in_ci({} if value is None else {"CI": value}) is expected


@pytest.mark.skipif(bool(os.environ.get("HYPOTHESIS_PROFILE")),
                    reason="HYPOTHESIS_PROFILE chooses the profile by hand")
def test_hypothesis_is_derandomized_exactly_in_ci():
    import test_properties

    assert settings.default.derandomize is in_ci()
    assert settings.default.database is None          # nothing written into the working tree
    # settings made at a test module's import inherit the profile
    for made in (test_properties.READER, test_properties.ENGINE, test_properties.FORMULA):
        assert made.derandomize is in_ci()
