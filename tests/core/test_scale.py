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
        np.testing.assert_allclose(
            result[name].to_numpy(), np.asarray(direct[name].value), rtol=1e-12, equal_nan=True, err_msg=name
        )
    assert list(result["flag"]) == list(np.asarray(direct["flag"]).astype(str))


def test_dask_rejects_montecarlo():
    from mwkin.scale import to_galactocentric_dask

    sample = mk.demo.survey(n=100, seed=1)
    columns = [c for c in sample.colnames if sample[c].ndim == 1]
    ddf = dd.from_pandas(sample[columns].to_pandas(), npartitions=1)
    with pytest.raises(ValueError, match="montecarlo"):
        to_galactocentric_dask(ddf, errors="montecarlo")


def _demo_frame(n, seed):
    sample = mk.demo.survey(n=n, seed=seed)
    columns = [c for c in sample.colnames if sample[c].ndim == 1]
    return sample, sample[columns].to_pandas()


def test_distributed_result_writes_to_parquet_and_round_trips(tmp_path):
    # The bug: to_parquet failed with ArrowInvalid on the meta of the 'flag' column.
    import pandas as pd

    from mwkin.scale import to_galactocentric_dask

    sample, df = _demo_frame(3000, 11)
    dd.from_pandas(df, npartitions=3).to_parquet(tmp_path / "survey")
    ddf = dd.read_parquet(tmp_path / "survey")
    star_columns = ["source_id", "ra", "dec", "parallax", "parallax_error", "pmra", "pmdec"]
    result = to_galactocentric_dask(ddf, keep=star_columns)
    result.to_parquet(tmp_path / "out", compute_kwargs={"scheduler": "synchronous"})

    back = pd.read_parquet(tmp_path / "out").sort_values("source_id")
    direct = mk.to_galactocentric(sample)
    order = np.argsort(np.asarray(sample["source_id"]))
    assert len(back) == len(sample)
    np.testing.assert_array_equal(back["source_id"].to_numpy(), np.asarray(sample["source_id"])[order])
    for name in ("x", "vy", "v_phi", "U", "distance"):
        np.testing.assert_allclose(
            back[name].to_numpy(), np.asarray(direct[name].value)[order], rtol=1e-12, equal_nan=True, err_msg=name
        )
    assert list(back["flag"]) == list(np.asarray(direct["flag"]).astype(str)[order])
    # The kept star columns make the written result a catalogue read_catalog accepts again.
    again = mk.read_catalog(back.reset_index(drop=True))
    np.testing.assert_array_equal(again["parallax"].value, np.asarray(sample["parallax"].value)[order])


def test_empty_partitions_have_the_same_columns_and_types():
    from mwkin.scale import galactocentric_partition

    _, df = _demo_frame(50, 2)
    full = galactocentric_partition(df, keep=("source_id",))
    empty = galactocentric_partition(df.iloc[:0], keep=("source_id",))
    assert list(full.columns) == list(empty.columns)
    assert dict(full.dtypes) == dict(empty.dtypes)


@pytest.mark.parametrize("reader", ["csv", "parquet"])
def test_a_bad_row_is_reported_by_source_id_and_file(tmp_path, reader):
    from mwkin.catalog import CatalogError
    from mwkin.scale import to_galactocentric_dask

    _, df = _demo_frame(600, 5)
    bad_id = int(df["source_id"].iloc[450])
    df.loc[450, "dec"] = 95.0
    files = [str(tmp_path / f"part{i}.{reader}") for i in range(2)]
    for path, part in zip(files, [df.iloc[:300], df.iloc[300:]]):
        part.to_csv(path, index=False) if reader == "csv" else part.to_parquet(path)
    if reader == "csv":  # dask's csv reader adds a per-row file column
        ddf, extra = dd.read_csv(files, include_path_column=True, blocksize=None), {}
    else:  # its parquet reader has none: name the file of each partition
        ddf = dd.read_parquet(files)
        assert ddf.npartitions == 2
        extra = {"partition_paths": files}
    with pytest.raises(CatalogError) as err:
        to_galactocentric_dask(ddf, **extra).compute(scheduler="synchronous")
    message = str(err.value)
    # Row 150 of its partition is meaningless on its own: the message names the star and the file.
    assert f"source_id {bad_id}" in message
    assert f"part1.{reader}" in message and "part0" not in message
    assert "dec" in message and "95" in message and "deg" in message
    assert err.value.source_ids == [bad_id] and err.value.partition == 1


def test_partition_paths_must_match_the_partitions():
    from mwkin.scale import to_galactocentric_dask

    _, df = _demo_frame(100, 1)
    with pytest.raises(ValueError, match="partition_paths: 1 paths for 2 partitions"):
        to_galactocentric_dask(dd.from_pandas(df, npartitions=2), partition_paths=["a.parquet"])


def test_bad_row_without_source_id_or_path_names_partition_and_index():
    from mwkin.catalog import CatalogError
    from mwkin.scale import to_galactocentric_dask

    _, df = _demo_frame(400, 6)
    df = df.drop(columns=["source_id"])
    df.loc[321, "dec"] = -91.0
    with pytest.raises(CatalogError) as err:
        to_galactocentric_dask(dd.from_pandas(df, npartitions=2)).compute(scheduler="synchronous")
    message = str(err.value)
    assert "partition 1" in message and "index 321" in message and "-91" in message
