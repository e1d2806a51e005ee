"""The Oort fit on samples with wild values: a least-squares fit warns and points to robust=True."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from astropy.table import Table

import mwkin as mk
from mwkin.oort import OortOutlierWarning, heavy_tail_outliers


@pytest.fixture(scope="module")
def survey():
    return mk.demo.survey(n=20000, seed=1)


def spoiled(survey, n_bad, scale, seed=0):
    """The survey with ``n_bad`` nearby stars given wild proper motions (a cross-match gone wrong)."""
    table = Table(survey, copy=True)
    rng = np.random.default_rng(seed)
    near = np.flatnonzero(np.asarray(table["parallax"]) > 2.0)  # within 0.5 kpc
    bad = rng.choice(near, n_bad, replace=False)
    table["pmra"][bad] = rng.normal(0.0, scale, n_bad)
    table["pmdec"][bad] = rng.normal(0.0, scale, n_bad)
    return table


def test_a_clean_sample_gives_no_outlier_warning(survey):
    with warnings.catch_warnings():
        warnings.simplefilter("error", OortOutlierWarning)
        fit = mk.fit_oort(survey, frame=mk.SolarFrame.preset("astropy v4.0"))
    assert not any("robust=True" in note for note in fit.notes)


def test_wild_values_without_clipping_warn_and_clipping_recovers_the_truth(survey):
    truth = survey.meta["truth"]
    frame = mk.SolarFrame.preset("astropy v4.0")
    table = spoiled(survey, 40, 2e4)
    with pytest.warns(OortOutlierWarning, match="robust=True"):
        plain = mk.fit_oort(table, frame=frame)
    assert any("robust=True" in note for note in plain.notes)
    # the least-squares fit is dragged far from the truth by 2 % of wild stars (its errors balloon too)...
    assert abs(plain.A - truth["A_kms_kpc"]) > 50.0
    # ...the clipped fit is back within its errors (the truth is the demo's own model)
    with warnings.catch_warnings():
        warnings.simplefilter("error", OortOutlierWarning)
        robust = mk.fit_oort(table, frame=frame, robust=True)
    assert robust.A == pytest.approx(truth["A_kms_kpc"], abs=4 * robust.errors["A"])
    assert robust.B == pytest.approx(truth["B_kms_kpc"], abs=4 * robust.errors["B"])


def test_heavy_tail_outliers_on_a_gaussian_and_a_contaminated_sample(rng):
    z = rng.normal(0.0, 1.0, (3, 100_000))
    used = np.ones(z.shape[1], dtype=bool)
    # Gaussian: P(|z| > 5) = 5.7e-7 per component (Abramowitz & Stegun 1964, 26.2 [from memory])
    assert np.count_nonzero(heavy_tail_outliers(z, used)) <= 3
    z[0, :200] = 1e3
    z[2, 500:510] = np.nan  # not observed: never an outlier
    flagged = heavy_tail_outliers(z, used)
    assert flagged[:200].all() and not flagged[500:510].any()
    assert not heavy_tail_outliers(z, np.zeros_like(used)).any()  # nothing used, nothing flagged


@pytest.mark.parametrize(
    "keyword, value, words",
    [
        ("bootstrap", 10**9, "bootstrap must be a whole number of resamples from 0 to 100000, got 1000000000"),
        ("bootstrap", True, "got True"),
        ("bootstrap", -1, "got -1"),
        ("seed", -5, "seed must be a whole number >= 0 or None, got -5"),
        ("seed", 1.5, "got 1.5"),
    ],
)
def test_bootstrap_and_seed_out_of_range_are_named_errors(survey, keyword, value, words):
    with pytest.raises(ValueError) as info:
        mk.fit_oort(survey[:500], **{keyword: value})
    assert words in str(info.value)
