"""Provenance of a run: input checksums, library versions and the ``run_info`` table.

Every number a run reports must be traceable to its inputs and parameters; this
module writes down what identifies them. Local inputs are hashed (SHA-256);
remote ones are described by the size, modification time and ETag GDAL reports
(:func:`faultmap.io.locations.remote_fingerprint`), without downloading them.
"""

from __future__ import annotations

import hashlib
import os
from datetime import datetime, timezone
from pathlib import Path

import pandas as pd

__all__ = [
    "RECORDED_LIBRARIES",
    "file_checksum",
    "library_versions",
    "value_text",
    "shown_path",
    "checksum_rows",
    "run_info_table",
]


def file_checksum(path, *, full_limit: int = 2 * 1024**3) -> str:
    """SHA-256 of a local file; files over ``full_limit`` bytes hash head, tail and size.

    A remote input (URL, ``/vsicurl/``, ``/vsis3/``...) or a GDAL virtual path is not downloaded to
    be hashed: it is described by what is cheap and stable, the size, modification time and ETag
    that GDAL reports (:func:`faultmap.io.locations.remote_fingerprint`), and the text says so.
    """
    from faultmap.io.locations import location_kind, remote_fingerprint

    if location_kind(path) != "local":
        return remote_fingerprint(path)
    path = Path(path)
    h = hashlib.sha256()
    size = path.stat().st_size
    with open(path, "rb") as fh:
        if size <= full_limit:
            for chunk in iter(lambda: fh.read(1 << 20), b""):
                h.update(chunk)
            return "sha256:" + h.hexdigest()
        h.update(fh.read(64 << 20))
        fh.seek(size - (64 << 20))
        h.update(fh.read())
        h.update(str(size).encode())
        return "sha256-partial:" + h.hexdigest()


#: Libraries whose versions every run records (the numbers depend on them).
RECORDED_LIBRARIES = (
    "numpy",
    "scipy",
    "pandas",
    "shapely",
    "geopandas",
    "pyproj",
    "pyogrio",
    "rasterio",
    "numba",
    "matplotlib",
)


def library_versions() -> dict[str, str]:
    """Versions of the libraries a run's numbers depend on, GDAL and PROJ included."""
    from importlib import metadata

    out = {}
    for name in RECORDED_LIBRARIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:  # pragma: no cover - all are dependencies
            out[name] = "not installed"
    try:
        import rasterio

        out["gdal"] = rasterio.__gdal_version__
    except Exception:  # noqa: BLE001  # pragma: no cover
        pass
    try:
        import pyproj

        out["proj"] = pyproj.proj_version_str
    except Exception:  # noqa: BLE001  # pragma: no cover
        pass
    return out


def value_text(v) -> str:
    """Write a run_info value as text: floats to 12 significant digits (no float noise), the rest as str."""
    if isinstance(v, float) or type(v).__name__ in ("float64", "float32"):
        return repr(float(f"{float(v):.12g}"))  # 1250.0000000000623 -> 1250.0
    return str(v)


def shown_path(v, base: Path) -> str:
    """Show a local path relative to the output's folder (results can be shared without one's folder layout).

    URLs and network paths are shown as they were given; in a path into a local archive
    (``/vsizip/...``) the archive's path is shown relative too.
    """
    from faultmap.io.locations import archive_parts, gdal_path, location_kind

    text = str(v)
    kind = location_kind(text)
    if kind == "virtual":
        parts = archive_parts(text)
        if parts is None:
            return text  # network or other virtual paths: as given
        prefix, archive, inner = parts  # a local archive: its path relative, like any local file
        return prefix + shown_path(archive, base) + ("/" + inner if inner else "")
    if kind != "local":
        return text
    text = gdal_path(text)  # a file:// URL
    try:
        return Path(os.path.relpath(Path(text).resolve(), base.resolve())).as_posix()
    except ValueError:  # another drive (Windows)
        return Path(text).name


def checksum_rows(kind: str, v) -> list[tuple[str, str]]:
    """``run_info`` rows that identify an input's content: size and SHA-256 (local), or a remote fingerprint."""
    from faultmap.io.locations import location_kind

    if location_kind(v) != "local":
        return [(f"input.{kind}.checksum", file_checksum(v))]
    p = Path(v)
    if not p.is_file():
        return []
    return [(f"input.{kind}.size_bytes", str(p.stat().st_size)), (f"input.{kind}.checksum", file_checksum(p))]


def run_info_table(
    ctx,
    order: list[str],
    params: dict,
    inputs: dict,
    out: Path,
    *,
    version: str,
    file_inputs: tuple[str, ...],
) -> pd.DataFrame:
    """Build the ``run_info`` layer of a run: what ran, on what, with which parameters and libraries.

    Parameters
    ----------
    ctx : faultmap.runner.RunContext
        The finished run's context (engine, CRS, fields, records, notices, warnings).
    order : list of str
        Tools in the order they ran.
    params : dict
        Resolved parameters per tool.
    inputs : dict
        The run's inputs (paths and layer names).
    out : pathlib.Path
        The output GeoPackage; local input paths are shown relative to its folder.
    version : str
        faultmap's version.
    file_inputs : tuple of str
        Input keys that name files (shown as paths, with checksums).

    Returns
    -------
    pandas.DataFrame
        Columns ``key`` and ``value`` (text).
    """
    base = out.parent
    rows: list[tuple[str, str]] = [
        ("faultmap_version", version),
        ("run_utc", datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")),
        ("tools", ",".join(order)),
        ("output", out.name),
        ("paths", "input paths are relative to the output's folder"),
        ("engine", ctx.engine.describe() if ctx.engine is not None else "in-process, 1 thread(s)"),
        ("working_crs_name", ctx.crs.name if ctx.crs is not None else ""),
        ("working_crs_wkt", ctx.crs.to_wkt() if ctx.crs is not None else ""),
    ]
    rows += [(f"library.{k}", v) for k, v in library_versions().items()]
    shown = {}
    for k, v in inputs.items():
        if k in file_inputs:
            shown[str(v)] = shown_path(v, base)
            shown[str(Path(str(v)).resolve())] = shown[str(v)]
            rows.append((f"input.{k}", shown[str(v)]))
            rows += checksum_rows(k, v)
        else:
            rows.append((f"input.{k}", value_text(v)))

    def _relative(text: str) -> str:
        for full in sorted(shown, key=len, reverse=True):
            text = text.replace(full, shown[full])
        return text

    for k, v in ctx.fields.items():
        rows.append((f"field.{k}", str(v)))
    for tool, ps in params.items():
        for k, v in ps.items():
            rows.append((f"param.{tool}.{k}", "" if v is None else value_text(v)))
    recorded = set()
    for k, v in ctx.records.items():
        rows.append((k, _relative(value_text(v))))
        recorded.add(f"{k.split('.', 1)[0]}: {v}")
    for i, n in enumerate(ctx.notices, 1):
        rows.append((f"notice.{i}", _relative(n)))
    kept = [w for w in ctx.warnings if w not in recorded]  # a recorded text (the hazard caution) once
    for i, w in enumerate(kept, 1):
        rows.append((f"warning.{i}", _relative(w)))
    return pd.DataFrame(rows, columns=["key", "value"])
