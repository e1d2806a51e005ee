"""Catalogues beyond one machine's memory: the same core functions mapped over Dask dataframes.

Each partition is a pandas DataFrame with the usual column names; it goes through
:func:`mwkin.catalog.read_catalog` and :func:`mwkin.kinematics.to_galactocentric` exactly as an in-memory
table would, so results agree row for row with the in-memory path. Requires the ``scale`` extra
(``pip install 'mwkin[scale]'``).
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

import numpy as np

from .catalog import CatalogError, read_catalog
from .columns import OUTPUT_COLUMNS as _OUTPUT_COLUMNS

if TYPE_CHECKING:
    import pandas as pd

    from .frames import SolarFrame

__all__ = [
    "OUTPUT_COLUMNS",
    "DEFAULT_KEEP",
    "PartitionError",
    "galactocentric_partition",
    "to_galactocentric_dask",
    "local_client",
]

#: Columns written for every star by :func:`to_galactocentric_dask`: the in-memory output columns
#: (:data:`mwkin.columns.OUTPUT_COLUMNS`), in the same order.
OUTPUT_COLUMNS = tuple(_OUTPUT_COLUMNS)


#: Input columns copied into the result when the input has them (identify the stars across partitions).
DEFAULT_KEEP = ("source_id",)

#: dtype of the ``flag`` column, in real and empty partitions alike (dask's meta must match the data,
#: and an ``object`` meta makes Parquet writers fail on the placeholder values dask puts into it).
_FLAG_DTYPE = "str"

_ROWS = re.compile(r"\brows? (\d+(?:, \d+)*)")


class PartitionError(CatalogError):
    """A partition of a Dask catalogue that :func:`mwkin.catalog.read_catalog` refuses.

    The message of the underlying :class:`~mwkin.catalog.CatalogError` with the rows translated into
    what identifies them outside the partition: the stars' ``source_id`` (when the column exists), the
    partition's index labels, its number and its file (when the path column exists).

    Attributes
    ----------
    partition : int or None
    paths : list of str
    source_ids : list
    """

    def __init__(self, message, partition=None, paths=(), source_ids=()):
        super().__init__(message)
        self.partition = partition
        self.paths = list(paths)
        self.source_ids = list(source_ids)


def _identify_rows(df, rows, path_column):
    """'source_id 12, 40; file a.parquet' for positional ``rows`` of the partition ``df``."""
    parts = []
    if "source_id" in df.columns:
        parts.append("source_id " + ", ".join(str(v) for v in df["source_id"].iloc[rows].tolist()))
    else:
        parts.append("index " + ", ".join(str(v) for v in df.index[rows].tolist()))
    if path_column and path_column in df.columns:
        files = list(dict.fromkeys(str(v) for v in df[path_column].iloc[rows].tolist()))
        parts.append("file " + ", ".join(files))
    return "; ".join(parts)


def _partition_error(exc, df, partition_info, path_column, partition_paths):
    """Re-raise a CatalogError of one partition with rows named as ``source_id`` / index and file."""
    number = partition_info.get("number") if isinstance(partition_info, dict) else None
    all_rows, source_ids, paths = [], [], []
    if partition_paths is not None and number is not None and 0 <= number < len(partition_paths):
        paths = [str(partition_paths[number])]

    def translate(match):
        rows = [int(r) for r in match.group(1).split(", ")]
        rows = [r for r in rows if 0 <= r < len(df)]
        if not rows:
            return match.group(0)
        all_rows.extend(rows)
        return f"{match.group(0)} of the partition [{_identify_rows(df, rows, path_column)}]"

    text = _ROWS.sub(translate, str(exc))
    if all_rows:
        if "source_id" in df.columns:
            source_ids = df["source_id"].iloc[all_rows].tolist()
        if path_column and path_column in df.columns:
            paths = list(dict.fromkeys(str(v) for v in df[path_column].iloc[all_rows].tolist()))
    elif path_column and path_column in df.columns and not paths:
        paths = list(dict.fromkeys(str(v) for v in df[path_column].tolist()))
    where = "in partition " + (str(number) if number is not None else "(number unknown)")
    if paths:
        where += " (file " + ", ".join(paths) + ")"
    return PartitionError(f"{where}: {text}", partition=number, paths=paths, source_ids=source_ids)


def _flag_series(values, index):
    import pandas as pd

    return pd.Series(
        np.asarray(values, dtype=object).astype(str) if len(values) else [], index=index, dtype=_FLAG_DTYPE
    )


def galactocentric_partition(
    df: pd.DataFrame,
    frame: SolarFrame | None = None,
    distance=None,
    errors="none",
    columns=OUTPUT_COLUMNS,
    keep=DEFAULT_KEEP,
    path_column="path",
    partition_paths=None,
    partition_info=None,
) -> pd.DataFrame:
    """Convert one pandas partition; returns a pandas DataFrame with plain float columns.

    Parameters
    ----------
    df : pandas.DataFrame
        One partition, with the columns :func:`mwkin.catalog.read_catalog` reads.
    frame, distance, errors, columns
        As for :func:`to_galactocentric_dask`.
    keep : sequence of str, default ("source_id",)
        Input columns copied unchanged into the result when present (the first columns).
    path_column : str or None, default "path"
        Column naming each row's file (dask's ``read_csv(..., include_path_column=True)``), used
        only in error messages and left out of the conversion.
    partition_paths : sequence of str, optional
        The file of each partition, by partition number; used only in error messages.
    partition_info : dict, optional
        Passed by dask (``{"number": i, ...}``); used only in error messages.

    Returns
    -------
    pandas.DataFrame
        The partition's index is kept, so the result aligns with the input rows. Column units are
        those of :func:`~mwkin.kinematics.to_galactocentric` (kpc, km/s, deg); ``flag`` is text.

    Raises
    ------
    PartitionError
        A :class:`~mwkin.catalog.CatalogError` naming the bad rows by ``source_id`` (or index label),
        the partition number and the file, rather than by their position within the partition.
    """
    import pandas as pd

    from .kinematics import to_galactocentric

    wanted = list(columns)
    if errors == "linear":
        wanted += [f"sigma_{c}" for c in columns if c not in ("l", "b")]
    kept = [name for name in keep if name in df.columns and name != path_column]
    if len(df) == 0:
        return _empty_frame(df, kept, wanted)
    stars = df.drop(columns=[path_column]) if path_column and path_column in df.columns else df
    try:
        table = read_catalog(stars.reset_index(drop=True))
    except CatalogError as exc:
        raise _partition_error(exc, df, partition_info, path_column, partition_paths) from exc
    out = to_galactocentric(table, frame=frame, distance=distance, errors=errors)
    data = {name: df[name].to_numpy() for name in kept}
    for name in wanted:
        if name in out.colnames:
            column = out[name]
            data[name] = np.asarray(getattr(column, "value", column), dtype=float)
    result = pd.DataFrame(data, index=df.index)
    result["flag"] = _flag_series(np.asarray(out["flag"]), df.index)
    return result


def _empty_frame(df, kept, names):
    import pandas as pd

    frame = pd.DataFrame({name: df[name].to_numpy() for name in kept}, index=df.index)
    for name in names:
        frame[name] = np.zeros(0)
    frame["flag"] = _flag_series([], df.index)
    return frame


def to_galactocentric_dask(
    ddf,
    frame: SolarFrame | None = None,
    distance=None,
    errors="none",
    columns=OUTPUT_COLUMNS,
    keep=DEFAULT_KEEP,
    path_column="path",
    partition_paths=None,
):
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
    columns : sequence of str, optional
        Result columns (see :data:`OUTPUT_COLUMNS`).
    keep : sequence of str, default ("source_id",)
        Input columns carried into the result when present; keep the star columns (ra, dec, parallax,
        pmra, pmdec, ...) to make the written result readable by :func:`~mwkin.catalog.read_catalog`.
    path_column : str or None, default "path"
        Name of the file column added by ``dd.read_csv(..., include_path_column=True)``; errors then
        name the file of a bad row.
    partition_paths : sequence of str, optional
        The file each partition came from, one per partition (e.g. the list of files given to
        ``dd.read_parquet`` when each file is one partition; dask's ``read_parquet`` has no path
        column). Errors then name the file of a bad row.

    Returns
    -------
    dask.dataframe.DataFrame
        Its ``meta`` matches the partitions exactly, so ``.to_parquet()`` writes it as it is.

    Raises
    ------
    ValueError
        For ``errors="montecarlo"``.
    PartitionError
        At compute time, for a partition :func:`~mwkin.catalog.read_catalog` refuses.
    """
    if errors not in ("none", "linear"):
        raise ValueError(f"errors must be 'none' or 'linear' for Dask catalogues, got {errors!r}")
    if partition_paths is not None:
        partition_paths = tuple(str(p) for p in partition_paths)
        if len(partition_paths) != ddf.npartitions:
            raise ValueError(
                f"partition_paths: {len(partition_paths)} paths for {ddf.npartitions} partitions; "
                f"give one file per partition"
            )
    options = dict(
        frame=frame,
        distance=distance,
        errors=errors,
        columns=columns,
        keep=tuple(keep),
        path_column=path_column,
        partition_paths=partition_paths,
    )
    meta = galactocentric_partition(ddf._meta, **options)
    return ddf.map_partitions(galactocentric_partition, meta=meta, **options)


def local_client(address: str | None = None, n_workers: int = 2, threads_per_worker: int = 1):
    """A ``dask.distributed`` client: a local cluster by default, or the scheduler at ``address``."""
    from dask.distributed import Client, LocalCluster

    if address:
        return Client(address)
    return Client(
        LocalCluster(n_workers=n_workers, threads_per_worker=threads_per_worker, processes=True, dashboard_address=None)
    )
