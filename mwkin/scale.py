"""Catalogues beyond one machine's memory: the same core functions mapped over Dask dataframes.

Each partition is a pandas DataFrame with the usual column names; it goes through
:func:`mwkin.catalog.read_catalog` and :func:`mwkin.kinematics.to_galactocentric` exactly as an in-memory
table would, so results agree row for row with the in-memory path. Requires the ``scale`` extra
(``pip install 'mwkin[scale]'``).
"""

from __future__ import annotations

import numpy as np

__all__ = ["OUTPUT_COLUMNS", "galactocentric_partition", "to_galactocentric_dask", "local_client"]

#: Columns written for every star by :func:`to_galactocentric_dask`.
OUTPUT_COLUMNS = ("x", "y", "z", "vx", "vy", "vz", "R", "phi", "v_R", "v_phi", "v_z",
                  "X", "Y", "Z", "U", "V", "W", "l", "b", "distance")


def galactocentric_partition(df, frame=None, distance=None, errors="none", columns=OUTPUT_COLUMNS):
    """Convert one pandas partition; returns a pandas DataFrame with plain float columns.

    The partition's index is kept, so the result aligns with the input rows. Column units are those of
    :func:`~mwkin.kinematics.to_galactocentric` (kpc, km/s, deg).
    """
    import pandas as pd

    from .catalog import read_catalog
    from .kinematics import to_galactocentric

    wanted = list(columns)
    if errors == "linear":
        wanted += [f"sigma_{c}" for c in columns if c not in ("l", "b")]
    if len(df) == 0:
        return _empty_frame(wanted, df.index, errors)
    table = read_catalog(df.reset_index(drop=True))
    out = to_galactocentric(table, frame=frame, distance=distance, errors=errors)
    data = {}
    for name in wanted:
        if name in out.colnames:
            column = out[name]
            data[name] = np.asarray(getattr(column, "value", column), dtype=float)
    data["flag"] = np.asarray(out["flag"]).astype(str)
    return pd.DataFrame(data, index=df.index)


def _empty_frame(names, index, errors):
    import pandas as pd

    frame = pd.DataFrame({name: np.zeros(0) for name in names}, index=index)
    frame["flag"] = np.array([], dtype=object)
    return frame


def to_galactocentric_dask(ddf, frame=None, distance=None, errors="none", columns=OUTPUT_COLUMNS):
    """Map :func:`galactocentric_partition` over a Dask DataFrame (lazy; call ``.compute()``).

    Parameters
    ----------
    ddf : dask.dataframe.DataFrame
        Partitions with ra, dec, parallax (or distance), pmra, pmdec and optionally radial_velocity,
        their errors and correlations, in the units of :func:`mwkin.catalog.read_catalog`.
    frame : SolarFrame, optional
    distance : InverseParallax or DistanceColumn, optional
    errors : {"none", "linear"}
        Monte Carlo errors are not offered here: draw them per partition with the core if needed.

    Returns
    -------
    dask.dataframe.DataFrame
    """
    if errors not in ("none", "linear"):
        raise ValueError(f"errors must be 'none' or 'linear' for Dask catalogues, got {errors!r}")
    meta = galactocentric_partition(ddf._meta, frame=frame, distance=distance, errors=errors, columns=columns)
    return ddf.map_partitions(galactocentric_partition, frame=frame, distance=distance, errors=errors,
                              columns=columns, meta=meta)


def local_client(address=None, n_workers=2, threads_per_worker=1):
    """A ``dask.distributed`` client: a local cluster by default, or the scheduler at ``address``."""
    from dask.distributed import Client, LocalCluster

    if address:
        return Client(address)
    return Client(LocalCluster(n_workers=n_workers, threads_per_worker=threads_per_worker, processes=True,
                               dashboard_address=None))
