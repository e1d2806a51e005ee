"""The Dask front gives row-for-row the same numbers as the in-memory core."""

from __future__ import annotations

import numpy as np
import pytest

import mwkin as mk

dd = pytest.importorskip("dask.dataframe")  # the `scale` extra; installed by `make test`


def test_dask_partitions_match_in_memory():
    from mwkin.scale import to_galactocentric_dask

    sample = mk.demo.survey(n=4000, seed=7)
    frame = mk.SolarFrame.preset("astropy pre-v4.0")
    columns = [c for c in sample.colnames if sample[c].ndim == 1]
    df = sample[columns].to_pandas()
    ddf = dd.from_pandas(df, npartitions=4)
    result = to_galactocentric_dask(ddf, frame=frame, errors="linear").compute(scheduler="synchronous")
    direct = mk.to_galactocentric(sample, frame=frame, errors="linear")
    assert len(result) == len(sample)
    for name in ("x", "vy", "v_phi", "U", "sigma_v_phi"):
        np.testing.assert_allclose(result[name].to_numpy(), np.asarray(direct[name].value),
                                   rtol=1e-12, equal_nan=True, err_msg=name)
    assert list(result["flag"]) == list(np.asarray(direct["flag"]).astype(str))


def test_dask_rejects_montecarlo():
    from mwkin.scale import to_galactocentric_dask

    sample = mk.demo.survey(n=100, seed=1)
    columns = [c for c in sample.colnames if sample[c].ndim == 1]
    ddf = dd.from_pandas(sample[columns].to_pandas(), npartitions=1)
    with pytest.raises(ValueError, match="montecarlo"):
        to_galactocentric_dask(ddf, errors="montecarlo")
