"""The Toomre diagram's coordinates (mwkin.kinematics.toomre)."""

from __future__ import annotations

import numpy as np

from mwkin.kinematics.toomre import constant_speed_curve, toomre_ordinate


def test_ordinate_is_the_speed_perpendicular_to_rotation():
    # common practice (no source): the Toomre ordinate is sqrt(v_R^2 + v_z^2); NaN stays NaN
    out = toomre_ordinate([3.0, -5.0, np.nan], [4.0, 12.0, 1.0])
    np.testing.assert_allclose(out[:2], [5.0, 13.0], rtol=0, atol=1e-12)
    assert np.isnan(out[2])


def test_constant_speed_curve_is_at_that_speed_from_the_lsr():
    # common practice (no source): a star on the curve has peculiar speed |(v_phi - v_LSR, v_perp)| = s
    x, y = constant_speed_curve(233.36, 100.0, n_points=91)
    np.testing.assert_allclose(np.hypot(x - 233.36, y), 100.0, rtol=1e-13)
    assert np.all(y >= -1e-12) and len(x) == 91
    assert x[0] == 333.36 and abs(x[-1] - 133.36) < 1e-12
