"""Files: formats from suffixes and content, loading through astropy/pyarrow, header checks (duplicate columns, encodings)."""

from __future__ import annotations

import os

from astropy.table import Table

from .values import _BOM, CatalogError

_FORMATS = {
    "csv": "ascii.csv",
    "ecsv": "ascii.ecsv",
    "fits": "fits",
    "votable": "votable",
    "parquet": "parquet",
}
_SUFFIXES = {
    ".csv": "csv",
    ".ecsv": "ecsv",
    ".fits": "fits",
    ".fit": "fits",
    ".fts": "fits",
    ".vot": "votable",
    ".votable": "votable",
    ".xml": "votable",
    ".parquet": "parquet",
    ".pq": "parquet",
}
_COMPRESSION_SUFFIXES = (".gz", ".bz2", ".xz")

_TEXT_FORMATS = ("ascii.csv", "ascii.ecsv")  # the formats encoding= applies to
_DEFAULT_ENCODING = "utf-8-sig"  # UTF-8, with a byte order mark (if any) removed


def _load(source, format, encoding=None):
    """Return (table, description, owned, format used or None)."""
    text_only = f"encoding= applies only to CSV and ECSV files (text), got encoding={encoding!r} for "
    if isinstance(source, Table):
        if encoding is not None:
            raise CatalogError(text_only + "an astropy Table")
        return source, "astropy Table", False, None
    if type(source).__module__.split(".")[0] == "pandas" and hasattr(source, "columns"):
        if encoding is not None:
            raise CatalogError(text_only + "a pandas DataFrame")
        duplicated = list(source.columns[source.columns.duplicated()])
        if duplicated:
            raise CatalogError(f"the DataFrame has more than one column named {duplicated}")
        if not all(isinstance(name, str) for name in source.columns):
            source = source.rename(columns=str)
        index = getattr(source.index, "name", None) is not None and source.index.name not in source.columns
        try:
            table = Table.from_pandas(source, index=index)
        except Exception as exc:
            raise CatalogError(f"could not convert the pandas DataFrame to a table: {exc}") from exc
        return table, "pandas DataFrame", False, None
    if isinstance(source, (str, os.PathLike)):
        path = os.fspath(source)
        if not os.path.exists(path):
            raise CatalogError(f"file not found: {path}")
        fmt = format or _format_from_suffix(path)
        astropy_format = _FORMATS.get(fmt, fmt)
        if astropy_format == "ascii.csv" and _looks_like_ecsv(path, encoding):
            astropy_format = "ascii.ecsv"
        if encoding is not None and astropy_format not in _TEXT_FORMATS:
            raise CatalogError(text_only + f"{path} (read as {astropy_format})")
        _check_content_matches_format(path, astropy_format)
        _check_header(path, astropy_format, encoding, path)
        if astropy_format == "parquet":
            _verify_parquet_checksums(path)
        return _read_file(path, astropy_format, path, encoding), path, True, astropy_format
    if hasattr(source, "read"):
        if format is None:
            raise CatalogError("a file object needs format= (one of: " + ", ".join(_FORMATS) + ")")
        astropy_format = _FORMATS.get(format, format)
        if encoding is not None and astropy_format not in _TEXT_FORMATS:
            raise CatalogError(text_only + f"a file object read as {astropy_format}")
        if _seekable(source):  # look at the header, then go back to where the reader starts
            position = source.tell()
            try:
                _check_header(source, astropy_format, encoding, "file object")
            finally:
                source.seek(position)
        return _read_file(source, astropy_format, "file object", encoding), "file object", True, format
    raise CatalogError(
        f"cannot read a catalogue from a {type(source).__name__}; give a file path, an astropy Table "
        f"or QTable, or a pandas DataFrame"
    )


def _seekable(fileobj):
    try:
        return bool(fileobj.seekable())
    except (AttributeError, OSError, ValueError):
        return False


#: First bytes of the binary formats (FITS standard 4.0, Sect. 4.4.1.1; Apache Parquet format
#: specification, "PAR1"; the XML declaration or VOTABLE element of a VOTable) [from memory].
_MAGIC = (
    (b"SIMPLE  =", "fits", "FITS"),
    (b"PAR1", "parquet", "Parquet"),
    (b"<?xml", "votable", "XML/VOTable"),
    (b"<VOTABLE", "votable", "VOTable"),
)


def _check_content_matches_format(path, astropy_format):
    """Refuse a file whose first bytes say it is another format than its name (or format=) says."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(16)
    except OSError:
        return  # the reader reports it
    for magic, fmt, spoken in _MAGIC:
        if head.startswith(magic) and astropy_format != fmt:
            raise CatalogError(
                f"{path} is read as {astropy_format} (from its name or format=), but its content "
                f"is a {spoken} file (it starts with {magic!r}): rename it or pass format={fmt!r}"
            )


def _verify_parquet_checksums(path):
    """Check the page checksums a Parquet writer may have stored (pyarrow keeps them optional).

    Damaged data pages in a file with intact metadata otherwise read without error; where the writer
    stored CRC checksums, pyarrow can verify them. Files without checksums pass (the range checks
    still look at the values).
    """
    import pyarrow.parquet as pq

    try:
        pq.read_table(path, page_checksum_verification=True)
    except OSError as exc:
        raise CatalogError(
            f"{path} is damaged: a Parquet data page fails its checksum ({exc}); nothing was read from it"
        ) from None
    except Exception:  # noqa: BLE001 - any other problem is reported by the reader with its own message
        return


def _read_file(source, astropy_format, description, encoding=None):
    kwargs = {}
    if astropy_format in _TEXT_FORMATS:
        kwargs["encoding"] = encoding or _DEFAULT_ENCODING
    try:
        return Table.read(source, format=astropy_format, **kwargs)
    except UnicodeDecodeError as exc:
        raise CatalogError(_decode_problem(description, exc, kwargs["encoding"], encoding is None)) from None
    except Exception as exc:
        raise CatalogError(f"could not read {description} as {astropy_format}: {exc}") from exc


def _decode_problem(description, exc, used, default):
    """Message for a text file that is not in the encoding it was read with."""
    bad = exc.object[exc.start : exc.start + 4] if isinstance(exc.object, bytes) else b""
    where = ""
    if isinstance(exc.object, bytes) and len(exc.object) > exc.start:
        line = exc.object.count(b"\n", 0, exc.start) + 1
        where = f" at line {line} (byte {exc.start} of the text)"
    if bad[:2] in (b"\xff\xfe", b"\xfe\xff") and exc.start == 0:
        hint = "it starts with a UTF-16 byte order mark: pass encoding='utf-16'"
    elif default:
        hint = (
            "it is not UTF-8, so it is probably in a legacy 8-bit encoding such as Latin-1 "
            "(ISO-8859-1) or Windows-1252: pass encoding='latin-1' (or the file's real encoding)"
        )
    else:
        hint = "pass the file's real encoding as encoding="
    return (
        f"could not read {description} as {used} text: byte {bad[:1]!r}{where} cannot be decoded ({exc.reason}); {hint}"
    )


def _duplicates(names):
    """{name: [0-based positions]} for every name given more than once (blanks around it ignored)."""
    positions: dict[str, list[int]] = {}
    for i, name in enumerate(names):
        positions.setdefault(str(name).strip().lstrip(_BOM), []).append(i)
    return {name: where for name, where in positions.items() if len(where) > 1}


def _header_names(source, astropy_format, encoding):
    """Column names as written in the file (before any reader renames a repeated one), or None.

    A reader that meets a repeated column name renames the later one (astropy's CSV, ECSV and
    VOTable readers append ``_1``, ``_2``) or fails with an obscure message (Parquet, FITS), so the
    names are taken from the header itself: the first line of a CSV file, the column line of an ECSV
    file, the TTYPEn keywords of the first FITS table, the FIELDs of the first VOTable table (their
    IDs where given, as astropy uses them), the Parquet schema.
    """
    if astropy_format in _TEXT_FORMATS:
        return _text_header_names(source, astropy_format, encoding or _DEFAULT_ENCODING)
    if astropy_format == "parquet":
        import pyarrow.parquet as pq

        return list(pq.read_schema(source).names)
    if astropy_format == "fits":
        from astropy.io import fits

        with fits.open(source) as hdus:
            for hdu in hdus:
                if isinstance(hdu, (fits.BinTableHDU, fits.TableHDU)):
                    header = hdu.header
                    return [str(header.get(f"TTYPE{i}", "")) for i in range(1, header.get("TFIELDS", 0) + 1)]
        return None
    if astropy_format == "votable":
        return _votable_field_names(source)
    return None


def _text_header_names(source, astropy_format, encoding):
    """The column line of a CSV file (its first non-blank line; astropy's CSV reader knows no comment
    lines) or of an ECSV file (the first line after the '#' header, split at the delimiter the
    header states, a blank by default)."""
    import csv

    from astropy.utils.data import get_readable_fileobj

    ecsv = astropy_format == "ascii.ecsv"
    delimiter = " " if ecsv else ","
    with get_readable_fileobj(source, encoding=encoding) as fh:
        for line in fh:
            if ecsv and line.lstrip().startswith("#"):
                stated = line.lstrip().lstrip("#").strip()
                if stated.startswith("delimiter:"):
                    delimiter = stated.split(":", 1)[1].strip().strip("'\"") or " "
                continue
            if line.strip():
                return next(csv.reader([line.rstrip("\r\n")], delimiter=delimiter, skipinitialspace=True))
    return None


def _votable_field_names(source):
    """Names astropy gives the columns of the first VOTable table: each FIELD's ID, else its name."""
    import xml.etree.ElementTree as ElementTree

    from astropy.utils.data import get_readable_fileobj

    names, depth = [], 0
    with get_readable_fileobj(source, encoding="binary") as fh:
        for event, element in ElementTree.iterparse(fh, events=("start", "end")):
            tag = element.tag.rsplit("}", 1)[-1]
            if tag == "TABLE":
                depth += 1 if event == "start" else -1
                if event == "end":
                    break
            elif tag == "FIELD" and event == "start" and depth == 1:
                names.append(element.get("ID") or element.get("name") or "")
            elif tag == "DATA" and event == "start":
                break
    return names


def _check_header(source, astropy_format, encoding, description):
    """Refuse a file whose header gives one column name twice (see :func:`_header_names`)."""
    try:
        names = _header_names(source, astropy_format, encoding)
    except Exception:  # noqa: BLE001 - an unreadable file is reported by the reader itself, with its message
        return
    repeated = _duplicates(names or [])
    if repeated:
        text = "; ".join(
            f"{name!r} is columns {' and '.join(str(i + 1) for i in where)}" for name, where in repeated.items()
        )
        raise CatalogError(
            f"{description}: the header gives a column name more than once ({text}, counting from 1); "
            f"a reader would keep the first and silently rename the others. Rename or drop the "
            f"repeated columns first"
        )


def _format_from_suffix(path):
    name = path.lower()
    for suffix in _COMPRESSION_SUFFIXES:
        if name.endswith(suffix):
            name = name[: -len(suffix)]
    ext = os.path.splitext(name)[1]
    if ext not in _SUFFIXES:
        raise CatalogError(
            f"cannot tell the format of {path!r} from its suffix {ext!r}; known suffixes: "
            f"{', '.join(_SUFFIXES)}; or pass format= (one of {', '.join(_FORMATS)}, or any astropy format)"
        )
    return _SUFFIXES[ext]


def _looks_like_ecsv(path, encoding=None):
    """Gaia archive 'CSV' downloads may really be ECSV, which keeps the units."""
    from astropy.utils.data import get_readable_fileobj

    try:
        with get_readable_fileobj(path, encoding=encoding or _DEFAULT_ENCODING) as fh:
            return fh.readline().startswith("# %ECSV")
    except (OSError, UnicodeDecodeError, LookupError):
        return False
