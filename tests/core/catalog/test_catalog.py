"""Tests of mwkin.catalog: reading, renaming, units and checks of star tables."""

import doctest
import re
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.table import MaskedColumn, QTable, Table
from astropy.tests.helper import assert_quantity_allclose
from hypothesis import given, settings
from hypothesis import strategies as st

import mwkin.catalog as catalog
from mwkin.catalog import (
    ALIAS_UNITS,
    COLUMN_ALIASES,
    CORRELATION_COLUMNS,
    ERROR_COLUMNS,
    STANDARD_UNITS,
    CatalogError,
    read_catalog,
)

N = 6


@pytest.fixture
def gaia_like():
    """A small table with every standard column, Gaia archive names, units and an extra column."""
    rng = np.random.default_rng(42)
    t = QTable()
    t["source_id"] = np.arange(N, dtype=np.int64) + 4295806720
    t["ra"] = rng.uniform(0, 360, N) * u.deg
    t["dec"] = rng.uniform(-80, 80, N) * u.deg
    t["parallax"] = rng.uniform(-0.5, 5, N) * u.mas
    t["pmra"] = rng.normal(0, 10, N) * u.mas / u.yr
    t["pmdec"] = rng.normal(0, 10, N) * u.mas / u.yr
    t["radial_velocity"] = rng.normal(0, 40, N) * u.km / u.s
    t["distance"] = rng.uniform(0.1, 3, N) * u.kpc
    for name in ERROR_COLUMNS:
        t[name] = rng.uniform(0.01, 1, N) * STANDARD_UNITS[name]
    for name in CORRELATION_COLUMNS:
        t[name] = rng.uniform(-0.9, 0.9, N) * u.one
    t["phot_g_mean_mag"] = rng.uniform(8, 18, N) * u.mag
    return t


def minimal(**overrides):
    """The required columns only, as a plain Table without units, with values overridden by name."""
    cols = {
        "ra": [10.0, 20.0, 30.0, 40.0],
        "dec": [-10.0, 0.0, 10.0, 20.0],
        "parallax": [1.0, 2.0, 0.5, 4.0],
        "pmra": [1.0, -2.0, 3.0, -4.0],
        "pmdec": [0.5, 0.6, 0.7, 0.8],
    }
    cols.update(overrides)
    return Table({k: v for k, v in cols.items() if v is not None})


def assert_same_values(out, ref):
    """Every standard column of ``ref`` is in ``out`` with the same values and unit."""
    for name in ref.colnames:
        if name in STANDARD_UNITS:
            assert out[name].unit == STANDARD_UNITS[name], name
            assert out[name].dtype == np.float64, name
            assert_quantity_allclose(out[name], u.Quantity(ref[name], STANDARD_UNITS[name]), rtol=1e-6)


# ---- file formats and in-memory inputs -----------------------------------------------------------


@pytest.mark.parametrize("suffix", [".csv", ".ecsv", ".fits", ".vot", ".parquet"])
def test_round_trip_through_files(tmp_path, gaia_like, suffix):
    path = tmp_path / f"stars{suffix}"
    fmt = {".csv": "ascii.csv", ".ecsv": "ascii.ecsv", ".fits": "fits", ".vot": "votable", ".parquet": "parquet"}[
        suffix
    ]
    gaia_like.write(path, format=fmt)
    out = read_catalog(path)
    assert len(out) == N
    assert_same_values(out, gaia_like)
    np.testing.assert_array_equal(out["source_id"], gaia_like["source_id"])
    np.testing.assert_allclose(u.Quantity(out["phot_g_mean_mag"]).value, gaia_like["phot_g_mean_mag"].value)
    assert out.meta["mwkin_source"] == str(path)
    assert out.meta["renamed"] == {}
    assert not out["has_nan"].any()
    assert out.meta["distance_column"] == "distance"


def test_csv_with_units_in_another_unit(tmp_path):
    # An ECSV file (carries units) written with parallax in arcsec and distance in pc.
    t = QTable(minimal())
    t["parallax"] = [0.001, 0.002, 0.0005, 0.004] * u.arcsec
    t["distance"] = [1000.0, 500.0, 2000.0, 250.0] * u.pc
    t["ra"] = t["ra"] * u.deg
    path = tmp_path / "stars.ecsv"
    t.write(path)
    out = read_catalog(path)
    # 1 arcsec = 1000 mas, 1 kpc = 1000 pc (definitions of the SI prefixes)
    assert_quantity_allclose(out["parallax"], [1.0, 2.0, 0.5, 4.0] * u.mas)
    assert_quantity_allclose(out["distance"], [1.0, 0.5, 2.0, 0.25] * u.kpc)


def test_csv_file_that_is_really_ecsv_keeps_units(tmp_path):
    t = QTable(minimal())
    t["parallax"] = t["parallax"] * u.arcsec
    path = tmp_path / "download.csv"
    t.write(path, format="ascii.ecsv")
    out = read_catalog(path)
    assert_quantity_allclose(out["parallax"], [1000.0, 2000.0, 500.0, 4000.0] * u.mas)


def test_format_argument_overrides_suffix(tmp_path, gaia_like):
    path = tmp_path / "stars.dat"
    gaia_like.write(path, format="fits")
    with pytest.raises(CatalogError, match=r"cannot tell the format.*'\.dat'"):
        read_catalog(path)
    out = read_catalog(path, format="fits")
    assert_same_values(out, gaia_like)


def test_compressed_csv(tmp_path):
    import gzip

    path = tmp_path / "stars.csv.gz"
    with gzip.open(path, "wt") as fh:
        fh.write("RA,DEC,PLX,pmRA,pmDE\n1,2,3,4,5\n")
    out = read_catalog(path)
    assert out["parallax"][0] == 3 * u.mas


def test_unreadable_and_missing_files(tmp_path):
    with pytest.raises(CatalogError, match="file not found"):
        read_catalog(tmp_path / "nope.csv")
    bad = tmp_path / "bad.fits"
    bad.write_text("not a fits file")
    with pytest.raises(CatalogError, match=r"could not read .*bad\.fits as fits"):
        read_catalog(bad)


def test_unsupported_source_type():
    with pytest.raises(CatalogError, match="cannot read a catalogue from a list"):
        read_catalog([1, 2, 3])


def test_file_object_needs_format(tmp_path):
    path = tmp_path / "stars.csv"
    minimal().write(path, format="ascii.csv")
    with open(path, "rb") as fh, pytest.raises(CatalogError, match="format="):
        read_catalog(fh)
    with open(path, "rb") as fh:
        out = read_catalog(fh, format="csv")
    assert out.meta["mwkin_source"] == "file object"
    assert len(out) == 4


@pytest.mark.parametrize("kind", ["Table", "QTable"])
def test_astropy_tables(gaia_like, kind):
    src = Table(gaia_like) if kind == "Table" else gaia_like
    out = read_catalog(src)
    assert isinstance(out, QTable)
    assert_same_values(out, gaia_like)
    assert out.meta["mwkin_source"] == "astropy Table"
    assert out.colnames[:-1] == gaia_like.colnames  # input order kept, has_nan appended
    assert out.colnames[-1] == "has_nan"


def test_result_does_not_share_standard_columns_with_input(gaia_like):
    before = gaia_like["parallax"].copy()
    out = read_catalog(gaia_like)
    out["parallax"][0] = 99 * u.mas
    assert_quantity_allclose(gaia_like["parallax"], before)


def test_pandas_dataframe(gaia_like):
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame({name: np.asarray(gaia_like[name]) for name in gaia_like.colnames})
    out = read_catalog(df)
    assert out.meta["mwkin_source"] == "pandas DataFrame"
    assert_same_values(out, gaia_like)
    np.testing.assert_array_equal(out["source_id"], gaia_like["source_id"])


def test_pandas_named_index_and_nullable_values():
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame(
        {
            "RA": [1.0, 2.0, 3.0],
            "DE": [0.0, 1.0, 2.0],
            "Plx": [1.0, 1.0, 1.0],
            "pmRA": [0.0, 0.0, 0.0],
            "pmDE": [0.0, 0.0, 0.0],
            "RV": pd.array([10.0, None, 30.0], dtype="Float64"),
            "source_id": [7, 8, 9],
        }
    ).set_index("source_id")
    out = read_catalog(df)
    np.testing.assert_array_equal(out["source_id"], [7, 8, 9])
    assert np.isnan(out["radial_velocity"][1])
    assert out.meta["nan_counts"]["radial_velocity"] == 1
    np.testing.assert_array_equal(out["has_nan"], [False, True, False])


def test_empty_table_keeps_columns():
    out = read_catalog(minimal(ra=[], dec=[], parallax=[], pmra=[], pmdec=[]))
    assert len(out) == 0
    assert {"ra", "dec", "parallax", "radial_velocity", "has_nan"} <= set(out.colnames)


# ---- names -------------------------------------------------------------------------------------


def test_catalogue_service_spellings_are_renamed():
    # Column labels of the Gaia DR3 table in VizieR (I/355), from memory.
    t = Table(
        {
            "Source": [1, 2],
            "RA_ICRS": [10.0, 11.0],
            "DE_ICRS": [1.0, 2.0],
            "Plx": [1.0, 2.0],
            "e_Plx": [0.1, 0.2],
            "pmRA": [1.0, 2.0],
            "e_pmRA": [0.1, 0.1],
            "pmDE": [3.0, 4.0],
            "e_pmDE": [0.1, 0.1],
            "RV": [5.0, 6.0],
            "e_RV": [1.0, 1.0],
            "RADEcor": [0.1, 0.2],
            "PlxpmRAcor": [-0.3, 0.3],
        }
    )
    out = read_catalog(t)
    assert out.meta["renamed"] == {
        "Source": "source_id",
        "RA_ICRS": "ra",
        "DE_ICRS": "dec",
        "Plx": "parallax",
        "e_Plx": "parallax_error",
        "e_pmRA": "pmra_error",
        "pmRA": "pmra",
        "pmDE": "pmdec",
        "e_pmDE": "pmdec_error",
        "RV": "radial_velocity",
        "e_RV": "radial_velocity_error",
        "RADEcor": "ra_dec_corr",
        "PlxpmRAcor": "parallax_pmra_corr",
    }
    assert out.colnames == [
        "source_id",
        "ra",
        "dec",
        "parallax",
        "parallax_error",
        "pmra",
        "pmra_error",
        "pmdec",
        "pmdec_error",
        "radial_velocity",
        "radial_velocity_error",
        "ra_dec_corr",
        "parallax_pmra_corr",
        "has_nan",
    ]
    assert_quantity_allclose(out["parallax_error"], [0.1, 0.2] * u.mas)


@pytest.mark.parametrize("alias, std", sorted(COLUMN_ALIASES.items()))
def test_every_alias_is_recognised_in_any_case(alias, std):
    t = minimal()
    if std in t.colnames:
        t.remove_column(std)
    values = {"ra_dec_corr": 0.5}.get(std, 1.0) if std != "source_id" else 5
    t[alias.upper()] = [values] * len(t)
    out = read_catalog(t)
    assert out.meta["renamed"][alias.upper()] == std
    assert std in out.colnames and alias.upper() not in out.colnames


def test_alias_table_is_consistent():
    standard = {"source_id", *STANDARD_UNITS}
    lowered = [a.lower() for a in COLUMN_ALIASES]
    assert len(lowered) == len(set(lowered)), "two aliases differ only in case"
    assert set(COLUMN_ALIASES.values()) <= standard
    assert not set(lowered) & standard, "a standard name is listed as an alias"
    assert set(ALIAS_UNITS) <= set(COLUMN_ALIASES)
    assert set(CORRELATION_COLUMNS) | set(ERROR_COLUMNS) <= set(STANDARD_UNITS)
    assert len(CORRELATION_COLUMNS) == 10
    # the module documentation lists every alias (it is built from the dict)
    for alias in COLUMN_ALIASES:
        assert f"``{alias}``" in catalog.__doc__


def test_user_aliases_extend_the_table():
    t = minimal()
    t.rename_column("parallax", "my_plx")
    t["err_of_plx"] = [0.1, 0.1, 0.1, 0.1]
    out = read_catalog(t, aliases={"MY_PLX": "parallax", "err_of_plx": "parallax_error"})
    assert out.meta["renamed"] == {"my_plx": "parallax", "err_of_plx": "parallax_error"}
    assert_quantity_allclose(out["parallax"], [1.0, 2.0, 0.5, 4.0] * u.mas)


def test_user_alias_errors():
    with pytest.raises(CatalogError, match=r"'plx' is mapped to 'parralax'.*standard names are"):
        read_catalog(minimal(), aliases={"plx": "parralax"})
    with pytest.raises(CatalogError, match=r"no column 'my_rv'; columns found: ra, dec"):
        read_catalog(minimal(), aliases={"my_rv": "radial_velocity"})


def test_two_columns_for_one_standard_name_is_an_error():
    t = minimal()
    t["RA_ICRS"] = t["ra"]
    with pytest.raises(CatalogError, match=r"columns 'ra' and 'RA_ICRS' all give the standard column 'ra'"):
        read_catalog(t)
    # ignoring one of them with aliases={name: None} resolves it; the ignored one passes through
    out = read_catalog(t, aliases={"RA_ICRS": None})
    assert "RA_ICRS" in out.colnames and out.meta["renamed"] == {}


def test_ignored_column_may_not_collide_with_a_standard_name():
    t = minimal()
    t["RA_ICRS"] = t["ra"]
    with pytest.raises(CatalogError, match=r"'ra' is left alone .* rename 'ra'"):
        read_catalog(t, aliases={"ra": None})


def test_missing_required_columns():
    t = minimal(pmdec=None, parallax=None)
    t["Gmag"] = [1.0, 2.0, 3.0, 4.0]
    with pytest.raises(CatalogError) as info:
        read_catalog(t)
    msg = str(info.value)
    assert "missing required column(s): pmdec, parallax or distance" in msg
    assert "Columns found: ra, dec, pmra, Gmag" in msg
    assert "pmDE" in msg and "Plx" in msg and "dist" in msg  # spellings recognised
    assert "aliases=" in msg


def test_distance_instead_of_parallax():
    t = minimal(parallax=None, dist=[0.1, 0.2, 0.3, 0.4])
    out = read_catalog(t)
    assert "parallax" not in out.colnames
    assert out.meta["distance_column"] == "distance"
    assert_quantity_allclose(out["distance"], [0.1, 0.2, 0.3, 0.4] * u.kpc)


# ---- units ---------------------------------------------------------------------------------------


def test_units_are_converted():
    t = QTable(minimal())
    t["ra"] = np.deg2rad(t["ra"]) * u.rad
    t["parallax"] = t["parallax"] / 1000 * u.arcsec
    t["pmra"] = t["pmra"] * u.mas / u.yr
    t["pmdec"] = t["pmdec"] / 1000 * u.arcsec / u.yr
    t["radial_velocity"] = [1000.0, 2000.0, -500.0, 0.0] * u.m / u.s
    t["distance"] = [100.0, 200.0, 300.0, 400.0] * u.pc
    t["ra_dec_corr"] = [10.0, 20.0, -50.0, 0.0] * u.percent
    out = read_catalog(t)
    # unit definitions: 1 rad = 180/pi deg, 1 arcsec = 1000 mas, 1 km = 1000 m, 1 kpc = 1000 pc
    assert_quantity_allclose(out["ra"], [10.0, 20.0, 30.0, 40.0] * u.deg)
    assert_quantity_allclose(out["parallax"], [1.0, 2.0, 0.5, 4.0] * u.mas)
    assert_quantity_allclose(out["pmdec"], [0.5, 0.6, 0.7, 0.8] * u.mas / u.yr)
    assert_quantity_allclose(out["radial_velocity"], [1.0, 2.0, -0.5, 0.0] * u.km / u.s)
    assert_quantity_allclose(out["distance"], [0.1, 0.2, 0.3, 0.4] * u.kpc)
    np.testing.assert_allclose(out["ra_dec_corr"].value, [0.1, 0.2, -0.5, 0.0])
    assert out["ra_dec_corr"].unit == u.dimensionless_unscaled


def test_units_argument_for_unitless_columns():
    t = minimal(parallax=[0.001, 0.002, 0.003, 0.004], Dist=[10.0, 20.0, 30.0, 40.0])
    out = read_catalog(t, units={"parallax": "arcsec", "Dist": u.pc})
    assert_quantity_allclose(out["parallax"], [1.0, 2.0, 3.0, 4.0] * u.mas)
    assert_quantity_allclose(out["distance"], [0.01, 0.02, 0.03, 0.04] * u.kpc)


def test_units_argument_errors():
    with pytest.raises(CatalogError, match=r"units: 'distance' is not a numeric standard column"):
        read_catalog(minimal(), units={"distance": "pc"})
    with pytest.raises(CatalogError, match=r"units: 'furlongs per fortnight' given for 'pmra'"):
        read_catalog(minimal(), units={"pmra": "furlongs per fortnight"})
    t = QTable(minimal())
    t["parallax"] = t["parallax"] * u.mas
    with pytest.raises(CatalogError, match=r"'parallax' carries the unit 'mas' but units= says 'arcsec'"):
        read_catalog(t, units={"parallax": "arcsec"})
    assert read_catalog(t, units={"parallax": "mas"})["parallax"][0] == 1 * u.mas


def test_unit_stated_in_the_name():
    t = minimal(parallax=None, distance_pc=[100.0, 200.0, 300.0, 400.0])
    out = read_catalog(t)
    assert_quantity_allclose(out["distance"], [0.1, 0.2, 0.3, 0.4] * u.kpc)
    # a unit the column carries wins over the name
    t = QTable(t)
    t["distance_pc"] = t["distance_pc"] / 1000 * u.kpc
    assert_quantity_allclose(read_catalog(t)["distance"], [0.1, 0.2, 0.3, 0.4] * u.kpc)


def test_incompatible_unit_is_an_error():
    t = QTable(minimal())
    t["parallax"] = t["parallax"] * u.km / u.s
    with pytest.raises(
        CatalogError,
        match=r"column 'parallax' has unit 'km / s', which cannot be "
        r"converted to the expected unit 'mas'",
    ):
        read_catalog(t)


def test_incompatible_unit_names_the_input_column():
    t = Table(minimal())
    t.rename_column("pmra", "pmRA")
    t["pmRA"].unit = u.deg
    with pytest.raises(CatalogError, match=r"column 'pmra' \(input column 'pmRA'\) has unit 'deg'.*'mas / yr'"):
        read_catalog(t)


def test_unrecognised_unit_from_a_file(tmp_path):
    path = tmp_path / "stars.ecsv"
    t = Table(minimal())
    t["parallax"].unit = u.Unit("milliparsnips", parse_strict="silent")
    t.write(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", u.UnitsWarning)  # astropy may warn while reading the unit
        with pytest.raises(CatalogError, match=r"'parallax' has unit 'milliparsnips', which astropy does not"):
            read_catalog(path)


# ---- checks of the values -------------------------------------------------------------------------


def test_dec_out_of_range():
    with pytest.raises(
        CatalogError,
        match=r"column 'dec': values outside \[-90, 90\] deg at rows 1, 3 "
        r"\(values 95 deg, -90.5 deg\)",
    ):
        read_catalog(minimal(dec=[0.0, 95.0, 90.0, -90.5]))


def test_many_bad_rows_are_summarised():
    n = 12
    t = Table(
        {"ra": np.zeros(n), "dec": np.full(n, 91.0), "parallax": np.ones(n), "pmra": np.zeros(n), "pmdec": np.zeros(n)}
    )
    with pytest.raises(CatalogError, match=r"rows 0, 1, 2, 3, 4, \.\.\. \(12 rows in all\) \(values 91 deg, "):
        read_catalog(t)


def test_negative_uncertainty():
    t = minimal(e_Plx=[0.1, -0.2, 0.0, 0.3])
    with pytest.raises(
        CatalogError,
        match=r"column 'parallax_error' \(input column 'e_Plx'\): negative "
        r"uncertainties at row 1 \(value -0.2 mas\)",
    ):
        read_catalog(t)


def test_correlation_out_of_range():
    t = minimal(pmra_pmdec_corr=[0.5, 1.0, -1.0, 1.5])
    with pytest.raises(
        CatalogError,
        match=r"'pmra_pmdec_corr': correlations outside \[-1, 1\] at row 3 "
        r"\(value 1.5\)",
    ):
        read_catalog(t)


def test_distance_not_positive():
    t = QTable(minimal(parallax=None))
    t["distance"] = [1.0, 0.0, -5.0, 2.0] * u.pc
    with pytest.raises(
        CatalogError,
        match=r"'distance': distances that are not positive at rows 1, 2 "
        r"\(values 0 kpc, -0.005 kpc\)",
    ):
        read_catalog(t)


def test_negative_parallax_is_allowed():
    out = read_catalog(minimal(parallax=[-1.0, 0.0, 1.0, 2.0]))
    assert_quantity_allclose(out["parallax"], [-1.0, 0.0, 1.0, 2.0] * u.mas)


def test_infinite_values():
    with pytest.raises(CatalogError, match=r"'pmdec': infinite values at row 2 \(value inf mas / yr\)"):
        read_catalog(minimal(pmdec=[0.0, 1.0, np.inf, 2.0]))


def test_text_column(tmp_path):
    path = tmp_path / "stars.csv"
    path.write_text("ra,dec,parallax,pmra,pmdec\n1,2,3,4,5\n1,2,n/a,4,5\n1,2,,4,5\n1,2,3,4,5\n")
    with pytest.raises(CatalogError, match=r"'parallax' is not numeric: row 1 \('n/a'\) is not a number"):
        read_catalog(path)


def test_boolean_and_object_columns():
    with pytest.raises(CatalogError, match=r"'pmra' is not numeric: it has data type bool"):
        read_catalog(minimal(pmra=[True, False, True, False]))
    t = minimal()
    t["pmdec"] = np.array([1.0, "x", None, 2], dtype=object)
    with pytest.raises(CatalogError, match=r"'pmdec' is not numeric: rows 1 \('x'\), 2 \(None\)"):
        read_catalog(t)
    t["pmdec"] = np.array([1.0, 2, 3.5, 4], dtype=object)  # numbers stored as objects are fine
    assert read_catalog(t)["pmdec"].dtype == np.float64


def test_all_problems_are_reported_together():
    t = minimal(dec=[0.0, 100.0, 0.0, 0.0], e_pmRA=[-1.0, 0.0, 0.0, 0.0])
    t["pmdec"].unit = u.km
    with pytest.raises(CatalogError) as info:
        read_catalog(t)
    msg = str(info.value)
    assert msg.startswith("3 problems in the catalogue")
    assert "'dec'" in msg and "'pmra_error'" in msg and "'pmdec' has unit 'km'" in msg


def test_infinite_ra_is_not_wrapped_into_nan():
    with pytest.raises(CatalogError, match=r"'ra': infinite values at rows 1, 2 \(values -inf deg, inf deg\)"):
        read_catalog(minimal(ra=[10.0, -np.inf, np.inf, 400.0]))


def test_ra_is_wrapped():
    out = read_catalog(minimal(ra=[-30.0, 360.0, 720.5, -1e-20]))
    assert_quantity_allclose(out["ra"], [330.0, 0.0, 0.5, 0.0] * u.deg)
    assert out.meta["ra_wrapped"] == 4
    assert np.all(out["ra"] < 360 * u.deg)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False), min_size=1, max_size=20))
def test_ra_wrapping_property(ra):
    # Changed with the ra limit: values beyond +-RA_LIMIT_DEG (three turns) used to be wrapped too;
    # now they are refused, naming the rows. Values within the limit are checked as before.
    n = len(ra)
    t = Table({"ra": ra, "dec": np.zeros(n), "parallax": np.ones(n), "pmra": np.zeros(n), "pmdec": np.zeros(n)})
    # Likewise subnormal values (below ~2.2e-308 in size, not zero) are refused, not wrapped.
    beyond = [i for i, value in enumerate(ra) if abs(value) > catalog.RA_LIMIT_DEG]
    subnormal = [i for i, value in enumerate(ra) if 0 < abs(value) < np.finfo(float).tiny]
    if beyond or subnormal:
        with pytest.raises(CatalogError) as info:
            read_catalog(t)
        if beyond:
            assert re.search(rf"'ra': values beyond \+-1080 deg .* at rows? {beyond[0]}\b", str(info.value))
        if subnormal:
            assert re.search(rf"'ra': subnormal values .* at rows? {subnormal[0]}\b", str(info.value))
        return
    out = read_catalog(t)["ra"].to_value(u.deg)
    assert np.all((out >= 0) & (out < 360))
    # same direction on the sky: equal cosine and sine (absolute error ~ 360 * eps * |ra| / 360 deg)
    rad_in, rad_out = np.deg2rad(ra), np.deg2rad(out)
    np.testing.assert_allclose(np.cos(rad_out), np.cos(rad_in), atol=1e-9)
    np.testing.assert_allclose(np.sin(rad_out), np.sin(rad_in), atol=1e-9)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.booleans(), min_size=5, max_size=5))
def test_case_of_names_does_not_matter(upper):
    names = ["RA_ICRS", "DE_ICRS", "Plx", "pmRA", "pmDE"]
    names = [n.upper() if up else n.lower() for n, up in zip(names, upper)]
    t = Table(dict(zip(names, [[1.0], [2.0], [3.0], [4.0], [5.0]])))
    out = read_catalog(t)
    assert [out[c][0].value for c in ["ra", "dec", "parallax", "pmra", "pmdec"]] == [1, 2, 3, 4, 5]


# ---- NaN and missing radial velocities ------------------------------------------------------------


def test_nan_is_flagged_not_dropped():
    t = minimal(
        parallax=[1.0, np.nan, 2.0, 3.0],
        pmra=[np.nan, np.nan, 1.0, 1.0],
        RV=[1.0, 2.0, 3.0, np.nan],
        e_Plx=[np.nan, 0.1, 0.1, 0.1],
    )
    out = read_catalog(t)
    assert len(out) == 4
    np.testing.assert_array_equal(out["has_nan"], [True, True, False, True])
    assert out.meta["nan_counts"] == {
        "ra": 0,
        "dec": 0,
        "parallax": 1,
        "pmra": 2,
        "pmdec": 0,
        "radial_velocity": 1,
        "parallax_error": 1,
    }
    assert out.meta["nan_flag_columns"] == ["ra", "dec", "pmra", "pmdec", "parallax", "radial_velocity"]
    assert out.meta["filled_with_nan"] == []


def test_masked_entries_become_nan(tmp_path):
    path = tmp_path / "stars.csv"
    path.write_text("ra,dec,plx,pmra,pmdec\n1,2,3,4,5\n1,,3,4,5\n1,2,3,4,5\n")
    out = read_catalog(path)
    assert np.isnan(out["dec"][1]) and not np.isnan(out["dec"][0])
    np.testing.assert_array_equal(out["has_nan"], [False, True, False])
    t = QTable(minimal())
    t["pmra"] = MaskedColumn([1.0, 2.0, 3.0, 4.0], mask=[False, False, True, False], unit="mas/yr")
    out = read_catalog(t)
    np.testing.assert_array_equal(np.isnan(out["pmra"].value), [False, False, True, False])
    assert not np.ma.is_masked(t["pmra"][0]) and np.ma.is_masked(t["pmra"][2])  # input untouched


def test_missing_radial_velocity_is_filled_with_nan():
    out = read_catalog(minimal())
    assert out["radial_velocity"].unit == u.km / u.s
    assert np.all(np.isnan(out["radial_velocity"]))
    assert out.meta["filled_with_nan"] == ["radial_velocity"]
    assert out.meta["nan_counts"]["radial_velocity"] == 4
    # a filled column does not make every row "has NaN"
    assert "radial_velocity" not in out.meta["nan_flag_columns"]
    assert not out["has_nan"].any()


def test_optional_columns_are_not_invented():
    out = read_catalog(minimal())
    for name in ERROR_COLUMNS + CORRELATION_COLUMNS + ("distance", "source_id"):
        assert name not in out.colnames


def test_distance_is_the_nan_flag_column_when_both_given():
    t = minimal(distance=[1.0, np.nan, 1.0, 1.0], parallax=[np.nan, 1.0, 1.0, 1.0])
    out = read_catalog(t)
    assert out.meta["distance_column"] == "distance"
    np.testing.assert_array_equal(out["has_nan"], [False, True, False, False])


def test_input_has_nan_column_is_replaced():
    t = minimal(pmra=[np.nan, 1.0, 1.0, 1.0])
    t["has_nan"] = [False, True, True, True]
    out = read_catalog(t)
    assert out.colnames.count("has_nan") == 1
    np.testing.assert_array_equal(out["has_nan"], [True, False, False, False])


def test_input_meta_is_kept_and_not_modified():
    t = minimal()
    t.meta["survey"] = "synthetic"
    out = read_catalog(t)
    assert out.meta["survey"] == "synthetic"
    assert set(t.meta) == {"survey"}


def test_docstring_examples():
    # the examples live in the package's modules (reader, values, files) and in mwkin.columns
    import mwkin.columns
    from mwkin.catalog import files, reader, values

    attempted = 0
    for module in (catalog, reader, values, files, mwkin.columns):
        result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
        assert result.failed == 0, module.__name__
        attempted += result.attempted
    assert attempted > 0


@pytest.mark.parametrize("suffix", [".ecsv", ".fits", ".parquet"])
def test_reading_a_result_again_gives_the_same_table(tmp_path, suffix):
    t = minimal(pmra=[np.nan, 1.0, 1.0, 1.0], ra=[-10.0, 0.0, 1.0, 2.0])
    first = read_catalog(t)  # radial_velocity filled with NaN
    path = tmp_path / f"stars{suffix}"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # FITS headers cannot hold the dict-valued meta
        first.write(path)
    again = read_catalog(path)
    assert again.colnames == first.colnames
    for name in first.colnames:
        np.testing.assert_array_equal(np.asarray(again[name]), np.asarray(first[name]))
    assert again.meta["nan_flag_columns"] == first.meta["nan_flag_columns"]


def test_pandas_duplicate_and_non_text_column_names():
    pd = pytest.importorskip("pandas")
    df = pd.DataFrame([[1.0, 2, 3, 4, 5, 6]], columns=["ra", "dec", "parallax", "pmra", "pmdec", "ra"])
    with pytest.raises(CatalogError, match=r"more than one column named \['ra'\]"):
        read_catalog(df)
    df = pd.DataFrame({"RA": [1.0], "DEC": [1.0], "plx": [1.0], "pmra": [1.0], "pmdec": [1.0], 7: [3]})
    assert "7" in read_catalog(df).colnames


def test_columns_are_described():
    out = read_catalog(minimal())
    assert "cos(dec)" in out["pmra"].info.description
    assert out["radial_velocity"].info.description == "heliocentric radial velocity"
    t = minimal(ra_pmdec_corr=[0.1, 0.1, 0.1, 0.1])
    assert read_catalog(t)["ra_pmdec_corr"].info.description == "correlation coefficient of ra and pmdec"


def test_long_column_lists_are_cut_short():
    t = Table({f"col{i}": [1.0] for i in range(100)})
    with pytest.raises(CatalogError, match=r"Columns found: col0, col1, .*col39, \.\.\. \(100 columns in all\)"):
        read_catalog(t)
