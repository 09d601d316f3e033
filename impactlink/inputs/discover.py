"""Find the contract's tables in a folder by their file names."""

from __future__ import annotations

from pathlib import Path

from impactlink.inputs._errors import InputError
from impactlink.schema import TABLE_EXTENSIONS, TABLES

__all__ = ["discover_tables", "SUPPORTED_EXTENSIONS"]

#: Extensions the reader understands (lower case, with the dot).
SUPPORTED_EXTENSIONS = tuple(dict.fromkeys((*TABLE_EXTENSIONS, ".csv", ".parquet", ".pq")))
_GEO_EXTENSIONS = (".gpkg", ".geojson", ".json", ".shp")


def discover_tables(folder: str | Path) -> dict[str, Path]:
    """Find the contract's tables in ``folder`` by file name.

    A table is found when a file's stem equals the contract name (``counties``, ``climate``,
    ``indicators``, ``yields``, ``prices``, ``price_index``, ``notices``, ``field_reports``,
    ``traits``, ``coverage``, ...; case-insensitive) and its extension is supported
    (``.csv``, ``.parquet``, ``.gpkg``, ``.geojson``, ``.json``, ``.shp``). Sub-folders are
    not searched.

    Parameters
    ----------
    folder : str or Path
        The data folder.

    Returns
    -------
    dict
        Contract table name -> file path, in the contract's table order.

    Raises
    ------
    InputError
        The folder does not exist, or two files claim the same table (for example
        ``climate.csv`` and ``climate.parquet``).
    """
    candidates = _candidates(folder)
    clashes = {k: v for k, v in candidates.items() if len(v) > 1}
    if clashes:
        name, paths = next(iter(clashes.items()))
        raise InputError(
            f"{Path(folder)}: {len(paths)} files claim the table {name!r}: "
            f"{', '.join(p.name for p in paths)}; keep one of them (or name the one to use "
            f"under [tables] in the project file)"
        )
    return {k: v[0] for k, v in candidates.items()}


def _candidates(folder: str | Path) -> dict[str, list[Path]]:
    """Contract name -> every supported file with that stem (sorted by name)."""
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(f"data folder {folder} does not exist or is not a folder; check the path")
    found: dict[str, list[Path]] = {}
    names = {n.lower(): n for n in TABLES}
    for path in sorted(folder.iterdir()):
        if not path.is_file():
            continue
        stem, ext = path.stem.lower(), path.suffix.lower()
        if stem in names and ext in SUPPORTED_EXTENSIONS:
            found.setdefault(names[stem], []).append(path)
    return {n: found[n] for n in TABLES if n in found}


def _unsupported(folder: Path, table: str) -> list[Path]:
    """Files named like ``table`` whose extension the reader does not understand."""
    if not folder.is_dir():
        return []
    return sorted(
        p
        for p in folder.iterdir()
        if p.is_file()
        and p.stem.lower() == table
        and p.suffix.lower() not in SUPPORTED_EXTENSIONS
        and p.suffix.lower() not in (".dbf", ".shx", ".prj", ".cpg", ".qix", ".sbn", ".sbx", ".xml")
    )
