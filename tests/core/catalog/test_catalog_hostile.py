"""Hostile inputs to mwkin.catalog.read_catalog: repeated columns, damaged files, encodings and
delimiters, absurd values, numbers written as text. Each test reproduces one reported problem."""

import gzip
import io
import struct
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.table import QTable, Table

from mwkin.catalog import RA_LIMIT_DEG, CatalogError, read_catalog
from mwkin.distances import DistanceUnitWarning

ROWS = {
    "ra": [10.5, 20.5, 30.5, 40.5],
    "dec": [-10.25, 0.75, 10.25, 20.75],
    "parallax": [1.5, 2.5, 0.5, 4.5],
    "pmra": [1.25, -2.25, 3.25, -4.25],
    "pmdec": [0.5, 0.625, 0.75, 0.875],
}
HEADER = ",".join(ROWS)
LINES = [",".join(repr(ROWS[k][i]) for k in ROWS) for i in range(4)]


def csv_text(header=HEADER, lines=LINES, sep=","):
    return "\n".join([header.replace(",", sep)] + [line.replace(",", sep) for line in lines]) + "\n"


# ---- 1. repeated and clashing column names, in every format ------------------------------------------


def _duplicate_message(path, name="pmra"):
    return rf"{path.name}: the header gives a column name more than once \('{name}' is columns \d+ and \d+"


def test_csv_with_a_repeated_column_is_refused(tmp_path):
    # astropy's CSV reader keeps the first 'pmra' and renames the second 'pmra_1', silently.
    path = tmp_path / "dup.csv"
    path.write_text(csv_text(HEADER + ",pmra", [line + ",9.0" for line in LINES]))
    with pytest.raises(CatalogError, match=_duplicate_message(path)):
        read_catalog(path)


def test_compressed_csv_and_file_object_with_a_repeated_column(tmp_path):
    text = csv_text(HEADER + ",pmra", [line + ",9.0" for line in LINES])
    path = tmp_path / "dup.csv.gz"
    with gzip.open(path, "wt") as fh:
        fh.write(text)
    with pytest.raises(CatalogError, match=_duplicate_message(path)):
        read_catalog(path)
    with pytest.raises(CatalogError, match="file object: the header gives a column name more than once"):
        read_catalog(io.BytesIO(text.encode()), format="csv")
    # a file object without repeated names is read from where it stood
    fh = io.BytesIO(csv_text().encode())
    assert read_catalog(fh, format="csv")["pmra"][1] == -2.25 * u.mas / u.yr


def test_ecsv_with_a_repeated_column_is_refused(tmp_path):
    path = tmp_path / "dup.ecsv"
    path.write_text(
        "# %ECSV 1.0\n# ---\n# datatype:\n"
        + "".join(f"# - {{name: {n}, datatype: float64}}\n" for n in [*ROWS, "pmra"])
        + " ".join([*ROWS, "pmra"])
        + "\n"
        + "".join(" ".join(repr(ROWS[k][i]) for k in ROWS) + " 9.0\n" for i in range(4))
    )
    with pytest.raises(CatalogError, match=_duplicate_message(path)):
        read_catalog(path)


def test_parquet_with_a_repeated_column_is_refused(tmp_path):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    names = [*ROWS, "pmra"]
    arrays = [pa.array(ROWS[k]) for k in ROWS] + [pa.array([9.0] * 4)]
    path = tmp_path / "dup.parquet"
    pq.write_table(pa.Table.from_arrays(arrays, names=names), path)
    with pytest.raises(CatalogError, match=_duplicate_message(path)):
        read_catalog(path)


def test_fits_with_a_repeated_column_is_refused(tmp_path):
    cols = [fits.Column(name=k, format="D", array=np.array(v)) for k, v in ROWS.items()]
    cols.append(fits.Column(name="zzzz", format="D", array=np.full(4, 9.0)))
    path = tmp_path / "dup.fits"
    fits.BinTableHDU.from_columns(cols).writeto(path)
    # astropy will not write two columns of one name, so the header card is edited in the bytes
    data = path.read_bytes()
    assert data.count(b"'zzzz    '") == 1
    path.write_bytes(data.replace(b"'zzzz    '", b"'pmra    '"))
    with pytest.raises(CatalogError, match=_duplicate_message(path)):
        read_catalog(path)


def _votable(fields, rows):
    head = "".join(f'<FIELD name="{name}" datatype="double"{extra}/>' for name, extra in fields)
    body = "".join("<TR>" + "".join(f"<TD>{v}</TD>" for v in row) + "</TR>" for row in rows)
    return (
        '<?xml version="1.0"?>\n<VOTABLE version="1.4" xmlns="http://www.ivoa.net/xml/VOTable/v1.3">'
        f"<RESOURCE><TABLE>{head}<DATA><TABLEDATA>{body}</TABLEDATA></DATA></TABLE></RESOURCE></VOTABLE>"
    )


def test_votable_with_a_repeated_column_is_refused(tmp_path):
    fields = [(k, "") for k in ROWS] + [("pmra", "")]
    rows = [[ROWS[k][i] for k in ROWS] + [9.0] for i in range(4)]
    path = tmp_path / "dup.vot"
    path.write_text(_votable(fields, rows))
    with pytest.raises(CatalogError, match=_duplicate_message(path)):
        read_catalog(path)
    # distinct IDs keep the columns apart (astropy names the columns by ID): not a repeated name
    fields = [(k, f' ID="{k}"') for k in ROWS] + [("pmra", ' ID="pmra_other"')]
    path.write_text(_votable(fields, rows))
    out = read_catalog(path)
    assert "pmra_other" in out.colnames and out["pmra"][1] == -2.25 * u.mas / u.yr


@pytest.mark.parametrize("suffix", [".csv", ".ecsv", ".fits", ".vot", ".parquet"])
def test_alias_clash_in_a_file_names_the_file(tmp_path, suffix):
    t = Table(ROWS)
    t["pm_ra"] = t["pmra"]
    path = tmp_path / f"clash{suffix}"
    t.write(
        path,
        format={".csv": "ascii.csv", ".ecsv": "ascii.ecsv", ".fits": "fits", ".vot": "votable", ".parquet": "parquet"}[
            suffix
        ],
    )
    with pytest.raises(
        CatalogError,
        match=rf"{path.name}: columns 'pmra' and 'pm_ra' all give the standard "
        r"column 'pmra'",
    ):
        read_catalog(path)


def test_alias_clash_in_memory():
    pd = pytest.importorskip("pandas")
    t = Table(ROWS)
    t["pm_ra"] = t["pmra"]
    with pytest.raises(CatalogError, match=r"astropy Table: columns 'pmra' and 'pm_ra' all give"):
        read_catalog(t)
    with pytest.raises(CatalogError, match=r"pandas DataFrame: columns 'pmra' and 'pm_ra' all give"):
        read_catalog(t.to_pandas())
    df = pd.DataFrame([[1.0, 2, 3, 4, 5, 6]], columns=[*ROWS, "pmra"])
    with pytest.raises(CatalogError, match=r"more than one column named \['pmra'\]"):
        read_catalog(df)


# ---- 2. a Parquet file with damaged data pages ---------------------------------------------------------


def _damaged_parquet(tmp_path, patches):
    """A Parquet file (plain encoding, no compression) with bytes of some values overwritten.

    ``patches`` maps a value written in the file to the 8 bytes that replace it; each value occurs
    once in the file, in a data page (the footer is left intact).
    """
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    path = tmp_path / "damaged.parquet"
    table = pa.table({k: pa.array(v, type=pa.float64()) for k, v in ROWS.items()})
    pq.write_table(table, path, compression="NONE", use_dictionary=False, write_statistics=False)
    data = bytearray(path.read_bytes())
    for value, replacement in patches.items():
        packed = struct.pack("<d", value)  # PLAIN encoding: little-endian IEEE 754 doubles
        assert data.count(packed) == 1, value
        at = data.index(packed)
        data[at : at + 8] = replacement
    path.write_bytes(bytes(data))
    return path


def test_damaged_parquet_values_are_caught(tmp_path):
    # Clearing the exponent bytes of 20.5 (ra, row 1) leaves a subnormal number (~5e-310); setting
    # those of 10.25 (dec, row 2) high gives ~1e308. The file still reads without error.
    sub = bytearray(struct.pack("<d", 20.5))
    sub[6:8] = b"\x00\x00"
    huge = bytearray(struct.pack("<d", 10.25))
    huge[6:8] = b"\xe0\x7f"
    path = _damaged_parquet(tmp_path, {20.5: bytes(sub), 10.25: bytes(huge)})
    raw = Table.read(path)
    assert 0 < abs(raw["ra"][1]) < np.finfo(float).tiny and abs(raw["dec"][2]) > 1e300  # the damage is there
    with pytest.raises(CatalogError) as info:
        read_catalog(path)
    msg = str(info.value)
    assert "column 'ra': subnormal values" in msg and "at row 1 (value " in msg
    assert "column 'dec': values outside [-90, 90] deg at row 2" in msg


def test_subnormal_values_are_refused_in_every_standard_column():
    for column in ("parallax", "pmdec", "pmra_error", "ra_dec_corr", "radial_velocity"):
        rows = dict(ROWS)
        rows[column] = [1.0, 5e-310, 0.0, -5e-320] if column != "pmra_error" else [1.0, 5e-310, 0.0, 5e-320]
        with pytest.raises(CatalogError, match=rf"'{column}': subnormal values .* at rows 1, 3"):
            read_catalog(Table(rows))
    # zero and the smallest normal number are fine
    rows = dict(ROWS, pmra=[0.0, -0.0, np.finfo(float).tiny, -np.finfo(float).tiny])
    assert read_catalog(Table(rows))["pmra"][2].value == np.finfo(float).tiny


def test_subnormal_values_in_large_columns_with_nan():
    # the scan works in blocks and has a separate path for columns with NaN
    n = 200_000
    pmra = np.linspace(-5.0, 5.0, n)  # passes near zero
    pmra[150_000] = 1e-310
    base = {k: np.full(n, v[0]) for k, v in ROWS.items()}
    with pytest.raises(CatalogError, match=r"'pmra': subnormal values .* at row 150000 \(value 1e-310"):
        read_catalog(Table(dict(base, pmra=pmra)))
    pmra[7] = np.nan
    with pytest.raises(CatalogError, match=r"'pmra': subnormal values .* at row 150000"):
        read_catalog(Table(dict(base, pmra=pmra)))


def test_radial_velocity_beyond_the_speed_of_light_is_refused():
    # speed of light 299792.458 km/s (SI definition of the metre)
    with pytest.raises(CatalogError, match=r"'radial_velocity': speeds of light \(299792 km/s\) or more at row 2"):
        read_catalog(Table(dict(ROWS, radial_velocity=[10.0, -299792.0, 3e5, np.nan])))


# ---- 3. byte order marks, delimiters, encodings ---------------------------------------------------------


def test_csv_with_a_byte_order_mark_is_read(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbf" + csv_text().encode())
    out = read_catalog(path)
    assert out.colnames[:5] == list(ROWS)
    assert out.meta["renamed"] == {}
    np.testing.assert_array_equal(out["ra"].value, ROWS["ra"])


def test_ecsv_with_a_byte_order_mark_keeps_its_units(tmp_path):
    t = QTable(ROWS)
    t["parallax"] = t["parallax"] * u.arcsec
    path = tmp_path / "bom.csv"  # a Gaia-style 'CSV' that is really ECSV
    t.write(path, format="ascii.ecsv")
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    out = read_catalog(path)
    np.testing.assert_allclose(out["parallax"].to_value(u.mas), [1500.0, 2500.0, 500.0, 4500.0])


def test_byte_order_mark_in_a_name_read_elsewhere_is_recognised():
    # e.g. a DataFrame from pandas.read_csv without encoding='utf-8-sig'
    t = Table({"\ufeffra" if k == "ra" else k: v for k, v in ROWS.items()})
    out = read_catalog(t)
    assert out.meta["renamed"] == {"\ufeffra": "ra"}
    np.testing.assert_array_equal(out["ra"].value, ROWS["ra"])


@pytest.mark.parametrize("sep, spoken", [(";", "';' (semicolon)"), ("\t", "a tab")])
def test_other_delimiters_are_named(tmp_path, sep, spoken):
    path = tmp_path / "stars.csv"
    path.write_text(csv_text(sep=sep))
    with pytest.raises(CatalogError, match=r"missing required column\(s\)") as info:
        read_catalog(path)
    msg = str(info.value)
    assert f"The likely cause: {path} separates its columns with {spoken}, not commas" in msg
    assert "delimiter=" in msg


def test_latin1_file_gives_a_clear_message_and_encoding_reads_it(tmp_path):
    path = tmp_path / "latin.csv"
    path.write_bytes((HEADER + ",name\n" + "\n".join(f"{line},Andr\xe9" for line in LINES) + "\n").encode("latin-1"))
    with pytest.raises(CatalogError) as info:
        read_catalog(path)
    msg = str(info.value)
    assert f"could not read {path} as utf-8-sig text: byte b'\\xe9' at line 2" in msg
    assert "encoding='latin-1'" in msg
    out = read_catalog(path, encoding="latin-1")
    assert list(out["name"]) == ["Andr\xe9"] * 4
    np.testing.assert_array_equal(out["pmdec"].value, ROWS["pmdec"])


def test_utf16_file_is_named(tmp_path):
    path = tmp_path / "wide.csv"
    path.write_bytes(csv_text().encode("utf-16"))
    with pytest.raises(CatalogError, match=r"UTF-16 byte order mark: pass encoding='utf-16'"):
        read_catalog(path)
    np.testing.assert_array_equal(read_catalog(path, encoding="utf-16")["dec"].value, ROWS["dec"])


def test_encoding_only_for_text(tmp_path):
    path = tmp_path / "stars.fits"
    Table(ROWS).write(path)
    with pytest.raises(CatalogError, match=r"encoding= applies only to CSV and ECSV files .* \(read as fits\)"):
        read_catalog(path, encoding="latin-1")
    with pytest.raises(CatalogError, match=r"encoding= applies only .* an astropy Table"):
        read_catalog(Table(ROWS), encoding="utf-8")


# ---- 4. distances that look like pc ---------------------------------------------------------------------


def test_distance_without_unit_in_pc_warns():
    rows = dict(ROWS, dist=[120.0, 800.0, 2500.0, 60.0])
    del rows["parallax"]
    with pytest.warns(
        DistanceUnitWarning,
        match=r"'distance' \(input column 'dist'\): the median distance is "
        r"460, taken as kpc \(no unit given\).*units=\{'distance': 'pc'\}",
    ):
        out = read_catalog(Table(rows))
    assert out["distance"][0] == 120.0 * u.kpc  # a warning, the values are as given
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        # a stated unit (column, units= or name) is no assumption: no warning
        read_catalog(Table(rows), units={"distance": "pc"})
        t = Table(rows)
        t["dist"].unit = u.pc
        read_catalog(t)
        read_catalog(Table({("distance_pc" if k == "dist" else k): v for k, v in rows.items()}))
        read_catalog(Table(dict(rows, dist=[1.0, 2.0, 60.0, 70.0])))  # median 31 kpc: plausible


# ---- 6. absurd right ascensions, numbers written as text -----------------------------------------------


def test_absurd_ra_is_refused_not_wrapped():
    with pytest.raises(
        CatalogError,
        match=r"'ra': values beyond \+-1080 deg .* at rows 1, 2 "
        r"\(values 1e\+20 deg, -1081 deg\)",
    ):
        read_catalog(Table(dict(ROWS, ra=[10.0, 1e20, -1081.0, 30.0])))
    out = read_catalog(Table(dict(ROWS, ra=[RA_LIMIT_DEG, -RA_LIMIT_DEG, -180.0, 719.5])))
    np.testing.assert_array_equal(out["ra"].value, [0.0, 0.0, 180.0, 359.5])


def test_numbers_as_text_follow_one_rule_for_csv_and_parquet(tmp_path):
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    text = [" 1.5", "2", "", "-3e1"]
    csv_path = tmp_path / "text.csv"
    csv_path.write_text(HEADER + "\n" + "\n".join(f"{t},0,1,2,3" for t in text) + "\n")
    pq_path = tmp_path / "text.parquet"
    columns = {k: pa.array([0.0, 0.0, 1.0, 2.0]) for k in ROWS}
    columns["ra"] = pa.array(text)
    pq.write_table(pa.table(columns), pq_path)
    from_csv = read_catalog(csv_path)["ra"].value
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # astropy notes the missing string length metadata
        from_parquet = read_catalog(pq_path)["ra"].value
    # blank -> missing (NaN), -30 deg wrapped to 330 deg, in both
    np.testing.assert_array_equal(from_csv, [1.5, 2.0, np.nan, 330.0])
    np.testing.assert_array_equal(from_parquet, from_csv)
    columns["ra"] = pa.array(["1.5", "n/a", "3", "x"])
    pq.write_table(pa.table(columns), pq_path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(CatalogError, match=r"'ra' is not numeric: rows 1 \('n/a'\), 3 \('x'\) are not numbers"):
            read_catalog(pq_path)


def test_numbers_as_bytes_and_objects():
    t = Table(ROWS)
    t["pmdec"] = np.array([b"0.5", b" 1", b"", b"2.5"])
    np.testing.assert_array_equal(read_catalog(t)["pmdec"].value, [0.5, 1.0, np.nan, 2.5])
    t["pmdec"] = np.array(["0.5", 1.0, "", " 2.5 "], dtype=object)
    np.testing.assert_array_equal(read_catalog(t)["pmdec"].value, [0.5, 1.0, np.nan, 2.5])


# ---------------------------------------------------------------------- content and units
def test_a_file_whose_content_is_another_format_than_its_name_says(tmp_path):
    from astropy.table import Table

    import mwkin as mk

    path = tmp_path / "stars.csv"
    Table(mk.demo.survey(n=5, seed=1)).write(tmp_path / "stars.fits")
    (tmp_path / "stars.fits").rename(path)
    with pytest.raises(CatalogError, match=r"content is a FITS file .* format='fits'"):
        mk.read_catalog(path)
    assert len(mk.read_catalog(path, format="fits")) == 5


def test_parquet_page_checksums_are_verified(tmp_path):
    """A flipped bit in a data page of a file written with checksums: refused, not read as another value."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    import mwkin as mk

    ra = np.full(64, 52.3232)
    table = pa.table(
        {"ra": ra, "dec": np.full(64, 10.0), "parallax": np.ones(64), "pmra": np.ones(64), "pmdec": np.ones(64)}
    )
    path = tmp_path / "stars.parquet"
    pq.write_table(table, path, compression=None, use_dictionary=False, write_page_checksum=True)
    data = bytearray(path.read_bytes())
    spot = data.find(np.float64(52.3232).tobytes() * 8)  # inside the data page, not its statistics
    data[spot + 7] ^= 0x01  # the exponent byte of the first ra: a plausible, wrong value
    path.write_bytes(bytes(data))
    with pytest.raises(CatalogError, match="fails its checksum"):
        mk.read_catalog(path)


def test_radial_velocities_in_m_per_s_without_a_unit_warn():
    import warnings

    from astropy.table import Table

    import mwkin as mk
    from mwkin.catalog import VelocityUnitWarning

    stars = Table(
        {
            "ra": [10.0, 20.0, 30.0],
            "dec": [0.0, 5.0, 10.0],
            "parallax": [1.0, 2.0, 3.0],
            "pmra": [1.0, 2.0, 3.0],
            "pmdec": [1.0, 2.0, 3.0],
            "radial_velocity": [25e3, -31e3, 12e3],
        }
    )
    with pytest.warns(VelocityUnitWarning, match="median \\|radial velocity\\| is 25000.*m/s"):
        mk.read_catalog(stars)
    stars["radial_velocity"] = [25.0, -31.0, 12.0]
    with warnings.catch_warnings():
        warnings.simplefilter("error", VelocityUnitWarning)
        mk.read_catalog(stars)
