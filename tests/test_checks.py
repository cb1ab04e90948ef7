"""Argument checks shared by the physics package."""

import numpy as np
import pytest

from porecast.physics._checks import as_finite, in_range


def test_in_range_names_argument_range_and_value():
    with pytest.raises(
        ValueError, match=r"grain_size_mm must be greater than 0 mm \(got -0.2 mm\)"
    ):
        in_range("grain_size_mm", [0.1, -0.2], 0.0, unit="mm", low_open=True)


def test_in_range_closed_interval_accepts_ends():
    out = in_range("porosity", [0.0, 0.4, 1.0], 0.0, 1.0)
    np.testing.assert_array_equal(out, [0.0, 0.4, 1.0])


def test_as_finite_refuses_nan():
    with pytest.raises(ValueError, match="temperature_c must be finite"):
        as_finite("temperature_c", [20.0, np.nan])
