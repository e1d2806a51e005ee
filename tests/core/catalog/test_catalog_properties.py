"""Property tests of mwkin.catalog.read_catalog against malformed input, for every reader.

For each reader (CSV, ECSV, FITS, VOTable, Parquet, astropy Table, pandas DataFrame) and each kind of
damage (NaN, infinities, subnormal and huge values, text, empty tables, repeated and missing
columns, wrong units, bad encodings) the outcome must be either a CatalogError naming the column,
a row and the unit, or a table whose values are exactly those written (right ascension wrapped into
[0, 360) deg, as documented). Never a silent change.

The expected outcome is worked out here from the documented rules (read_catalog's docstring), not
by calling the code under test.
"""

import math
import re
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable, Table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from mwkin.catalog import RA_LIMIT_DEG, REQUIRED_COLUMNS, STANDARD_UNITS, CatalogError, read_catalog

pd = pytest.importorskip("pandas")
pytest.importorskip("pyarrow")

TINY = np.finfo(np.float64).tiny
COLUMNS = ("ra", "dec", "parallax", "pmra", "pmdec")
FILE_FORMATS = {"csv": "ascii.csv", "ecsv": "ascii.ecsv", "fits": "fits", "votable": "votable", "parquet": "parquet"}
READERS = (*FILE_FORMATS, "table", "dataframe")
SUFFIX = {"csv": ".csv", "ecsv": ".ecsv", "fits": ".fits", "votable": ".vot", "parquet": ".parquet"}
FAST = settings(
    max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow]
)

# One cell: a plain value, or one kind of damage.
_cell = st.one_of(
    st.floats(-400.0, 400.0, allow_nan=False, allow_subnormal=False),
    st.just(math.nan),
    st.sampled_from([math.inf, -math.inf]),
    st.sampled_from([5e-310, -5e-320, 2.0e-308, -1e-315]),  # subnormal
    st.sampled_from([1e20, -1e300, 1.7e308, 1081.0, -1080.0, 1080.0, 90.0, -90.0, 0.0, -0.0]),
)
_table = st.integers(0, 4).flatmap(
    lambda n: st.fixed_dictionaries({name: st.lists(_cell, min_size=n, max_size=n) for name in COLUMNS})
)

_counter = iter(range(10**9))


def _path(tmp_path, reader):
    return tmp_path / f"t{next(_counter)}{SUFFIX[reader]}"


def _write(tmp_path, reader, columns, units=None):
    """The catalogue as the reader sees it: a file path, a Table or a DataFrame."""
    units = units or {}
    if reader == "dataframe":
        return pd.DataFrame({k: np.asarray(v, dtype=float) for k, v in columns.items()})
    t = QTable(
        {
            k: np.asarray(v, dtype=float) * u.Unit(units[k] if k in units else STANDARD_UNITS[k])
            for k, v in columns.items()
        }
    )
    if reader == "table":
        return t
    path = _path(tmp_path, reader)
    if reader == "csv":  # written by hand with repr(): the exact digits, 'nan', 'inf' (no units in CSV)
        lines = [",".join(columns)] + [
            ",".join(repr(float(columns[k][i])) for k in columns) for i in range(len(next(iter(columns.values()))))
        ]
        path.write_text("\n".join(lines) + "\n")
    else:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # e.g. VOTable notes on NaN or infinite values
            t.write(path, format=FILE_FORMATS[reader])
    return path


def _problems(columns):
    """{column: (first bad row, unit text)} from the documented rules, or {} if the table is fine."""
    bad = {}
    for name, values in columns.items():
        for i, v in enumerate(values):
            wrong = (
                math.isinf(v)
                or (v != 0 and abs(v) < TINY)
                or (name == "ra" and abs(v) > RA_LIMIT_DEG)
                or (name == "dec" and not math.isnan(v) and abs(v) > 90.0)
            )
            if wrong:
                bad[name] = (i, STANDARD_UNITS[name].to_string())
                break
    return bad


def _expected(name, v):
    """The value read_catalog must return for an accepted value (ra wrapped into [0, 360))."""
    if name == "ra" and not math.isnan(v) and not 0.0 <= v < 360.0:
        w = math.fmod(v, 360.0)
        w = w + 360.0 if w < 0 else w
        return 0.0 if w == 360.0 else w
    return v


def _assert_names(msg, column, row, unit):
    assert f"column '{column}'" in msg, msg
    # every problem line of the column lists its rows; the first bad row is in one of them
    listed = re.findall(rf"column '{column}'[^\n]*? rows? ([\d, ]+)", msg)
    assert str(row) in [r.strip() for rows in listed for r in rows.split(",")], msg
    assert unit in msg, msg


def _check(source, columns, **kwargs):
    problems = _problems(columns)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)  # e.g. astropy's notes on Parquet metadata
            out = read_catalog(source, **kwargs)
    except CatalogError as exc:
        assert problems, f"refused a valid table: {exc}"
        msg = str(exc)
        for column, (row, unit) in problems.items():
            _assert_names(msg, column, row, unit)
        return None
    assert not problems, f"accepted {problems}"
    n = len(next(iter(columns.values())))
    assert len(out) == n
    for name, values in columns.items():
        got = out[name].to_value(STANDARD_UNITS[name])
        want = np.array([_expected(name, v) for v in values], dtype=float)
        np.testing.assert_array_equal(got, want, err_msg=name)
    return out


@pytest.mark.parametrize("reader", READERS)
@FAST
@given(columns=_table)
def test_damaged_values(tmp_path, reader, columns):
    _check(_write(tmp_path, reader, columns), columns)


# ---- numbers written as text -----------------------------------------------------------------------

_text_cell = st.one_of(
    st.floats(-80.0, 80.0, allow_nan=False, allow_subnormal=False).map(repr),
    st.floats(-80.0, 80.0, allow_nan=False, allow_subnormal=False).map(lambda v: f"  {v!r} "),
    st.just(""),
    st.sampled_from(["abc", "1.2.3", "--", "n/a"]),
)


@pytest.mark.parametrize("reader", ["csv", "parquet", "table", "dataframe"])
@FAST
@given(text=st.lists(_text_cell, min_size=1, max_size=4))
def test_numbers_as_text(tmp_path, reader, text):
    # One rule: blank -> NaN, numbers read as numbers, anything else refused naming column and rows.
    n = len(text)
    columns = {k: [1.0] * n for k in COLUMNS if k != "pmdec"}
    junk = [i for i, s in enumerate(text) if s.strip() and not _is_number(s)]
    if reader == "csv":
        source = _path(tmp_path, reader)
        source.write_text(
            ",".join(columns)
            + ",pmdec\n"
            + "".join(",".join("1.0" for _ in columns) + "," + (f'"{s}"' if "," in s else s) + "\n" for s in text)
        )
    elif reader == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        source = _path(tmp_path, reader)
        pq.write_table(pa.table({**{k: pa.array(v) for k, v in columns.items()}, "pmdec": pa.array(text)}), source)
    elif reader == "table":
        source = Table({**columns, "pmdec": np.array(text, dtype=object)})
    else:
        source = pd.DataFrame({**columns, "pmdec": text})
    if reader == "csv" and all(not s.strip() for s in text):
        junk = []  # a CSV column with nothing in it: astropy reads it as text of blanks -> NaN
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            out = read_catalog(source)
    except CatalogError as exc:
        assert junk, f"refused numbers: {exc}"
        msg = str(exc)
        assert "column 'pmdec'" in msg and "is not numeric" in msg
        assert f"{junk[0]} ({text[junk[0]]!r})" in msg or f"{junk[0]} ({text[junk[0]].strip()!r})" in msg, msg
        return
    assert not junk, f"accepted text {junk}"
    want = [float(s) if s.strip() else math.nan for s in text]
    np.testing.assert_array_equal(out["pmdec"].to_value(u.mas / u.yr), want)


def _is_number(text):
    try:
        float(text)
    except ValueError:
        return False
    return True


# ---- repeated, clashing and missing columns ------------------------------------------------------------


@pytest.mark.parametrize("reader", READERS)
@FAST
@given(column=st.sampled_from(COLUMNS), how=st.sampled_from(["alias", "drop"]), n=st.integers(0, 3))
def test_clashing_and_missing_columns(tmp_path, reader, column, how, n):
    columns = {k: [float(i + 1) for i in range(n)] for k in COLUMNS}
    aliases = {"ra": "RA_ICRS", "dec": "DE_ICRS", "parallax": "Plx", "pmra": "pm_ra", "pmdec": "pm_dec"}
    if how == "alias":
        columns[aliases[column]] = list(columns[column])
        expected = rf"columns '{column}' and '{aliases[column]}' all give the standard column '{column}'"
    else:
        del columns[column]
        wanted = "parallax or distance" if column == "parallax" else column
        expected = rf"missing required column\(s\): {wanted}\. Columns found: "
    source = _write(tmp_path, reader, columns, {aliases[column]: STANDARD_UNITS[column]})
    with pytest.raises(CatalogError, match=expected):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            read_catalog(source)


def _raw_file(tmp_path, reader, names, rows):
    """A file whose header repeats a name (which no astropy writer makes): written by hand."""
    path = _path(tmp_path, reader)
    if reader == "csv":
        path.write_text(",".join(names) + "\n" + "".join(",".join(map(repr, r)) + "\n" for r in rows))
    elif reader == "ecsv":
        path.write_text(
            "# %ECSV 1.0\n# ---\n# datatype:\n"
            + "".join(f"# - {{name: {n}, datatype: float64}}\n" for n in names)
            + " ".join(names)
            + "\n"
            + "".join(" ".join(map(repr, r)) + "\n" for r in rows)
        )
    elif reader == "votable":
        fields = "".join(f'<FIELD name="{n}" datatype="double"/>' for n in names)
        body = "".join("<TR>" + "".join(f"<TD>{v!r}</TD>" for v in r) + "</TR>" for r in rows)
        path.write_text(
            '<?xml version="1.0"?><VOTABLE version="1.4" xmlns="http://www.ivoa.net/xml/VOTable/v1.3">'
            f"<RESOURCE><TABLE>{fields}<DATA><TABLEDATA>{body}</TABLEDATA></DATA></TABLE>"
            "</RESOURCE></VOTABLE>"
        )
    elif reader == "parquet":
        import pyarrow as pa
        import pyarrow.parquet as pq

        arrays = [pa.array([r[i] for r in rows], type=pa.float64()) for i in range(len(names))]
        pq.write_table(pa.Table.from_arrays(arrays, names=names), path)
    else:  # fits: placeholder names of one width, replaced in the header bytes
        from astropy.io import fits

        width = 24
        cols = [
            fits.Column(name=f"c{i}".ljust(width, "x"), format="D", array=np.array([r[i] for r in rows], dtype=float))
            for i in range(len(names))
        ]
        fits.BinTableHDU.from_columns(cols).writeto(path)
        data = path.read_bytes()
        for i, name in enumerate(names):
            data = data.replace(f"'{f'c{i}'.ljust(width, 'x')}'".encode(), f"'{name.ljust(width)}'".encode())
        path.write_bytes(data)
    return path


@pytest.mark.parametrize("reader", list(FILE_FORMATS))
@FAST
@given(column=st.sampled_from(COLUMNS + ("phot_g_mean_mag",)), n=st.integers(0, 3), last=st.booleans())
def test_repeated_column_names_in_files(tmp_path, reader, column, n, last):
    names = [*COLUMNS, "phot_g_mean_mag"]
    position = len(names) if last else 0
    names.insert(position, column)
    rows = [[float(j + 10 * i) for j in range(len(names))] for i in range(n)]
    path = _raw_file(tmp_path, reader, names, rows)
    with pytest.raises(
        CatalogError,
        match=rf"{re.escape(path.name)}: the header gives a column name more than "
        rf"once \('{column}' is columns \d+ and \d+",
    ):
        read_catalog(path)


# ---- units ----------------------------------------------------------------------------------------------

_UNITS = ["deg", "arcsec", "mas", "rad", "mas / yr", "arcsec / yr", "km / s", "kpc", "pc", "", "mag"]


@pytest.mark.parametrize("reader", ["ecsv", "fits", "votable", "parquet", "table"])
@FAST
@given(
    column=st.sampled_from(COLUMNS),
    unit=st.sampled_from(_UNITS),
    # values that stay normal floats after any unit conversion (subnormal results are refused, and
    # that refusal has its own tests)
    values=st.lists(
        st.floats(-1.0, 1.0, allow_nan=False, allow_subnormal=False).filter(lambda v: v == 0.0 or abs(v) > 1e-290),
        min_size=1,
        max_size=3,
    ),
)
def test_units(tmp_path, reader, column, unit, values):
    n = len(values)
    columns = {k: [0.5] * n for k in COLUMNS}
    columns[column] = values
    source = _write(tmp_path, reader, columns, {column: unit})
    target = STANDARD_UNITS[column]
    given_unit = u.Unit(unit)
    # astropy.units decides what converts (same physical type); an empty unit means "not stated"
    convertible = unit == "" or given_unit.physical_type == target.physical_type
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            out = read_catalog(source)
    except CatalogError as exc:
        assert not convertible, f"refused {unit!r} for {column}: {exc}"
        msg = str(exc)
        assert f"column '{column}' has unit '{given_unit.to_string()}'" in msg
        assert f"expected unit '{target.to_string()}'" in msg
        return
    assert convertible, f"accepted {unit!r} for {column}"
    factor = 1.0 if unit == "" else given_unit.to(target)
    want = np.array(values) * factor
    if column == "ra":
        want = np.array([_expected("ra", v) for v in want])
    np.testing.assert_allclose(out[column].to_value(target), want, rtol=1e-15, atol=0)


# ---- encodings ------------------------------------------------------------------------------------------


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    encoding=st.sampled_from(["utf-8", "utf-8-sig", "latin-1", "utf-16"]),
    name=st.text(alphabet="abcéñü", min_size=1, max_size=6),
    values=st.lists(st.floats(-80.0, 80.0, allow_nan=False, allow_subnormal=False), min_size=1, max_size=3),
)
def test_encodings(tmp_path, encoding, name, values):
    lines = [",".join(COLUMNS) + ",name"] + [",".join(repr(v) for _ in COLUMNS) + f",x{name}" for v in values]
    path = _path(tmp_path, "csv")
    path.write_bytes(("\n".join(lines) + "\n").encode(encoding))
    plain_ascii = all(ord(c) < 128 for c in name)
    readable = encoding in ("utf-8", "utf-8-sig") or (encoding == "latin-1" and plain_ascii)
    if readable:
        out = read_catalog(path)
        assert list(out["name"]) == [f"x{name}"] * len(values)
        np.testing.assert_array_equal(out["dec"].to_value(u.deg), values)
    else:
        with pytest.raises(
            CatalogError,
            match=rf"could not read {re.escape(str(path))} as utf-8-sig text: .*"
            rf"encoding='{'utf-16' if encoding == 'utf-16' else 'latin-1'}'",
        ):
            read_catalog(path)
    out = read_catalog(path, encoding=encoding)  # stating the encoding always reads it exactly
    assert list(out["name"]) == [f"x{name}"] * len(values)
    np.testing.assert_array_equal(out["pmra"].to_value(u.mas / u.yr), values)


def test_required_columns_are_the_documented_ones():
    # the properties above build tables from these names
    assert set(REQUIRED_COLUMNS) <= set(COLUMNS)
