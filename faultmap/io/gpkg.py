"""Atomic GeoPackage output and a read-only conformance check.

Every layer of a run goes into a fresh temporary file beside the target. The
file is checked (CRS of each layer re-read and compared with the working CRS,
GeoPackage conformance) and only then moved over the target with
:func:`os.replace`. A failed or interrupted run therefore leaves the earlier
result untouched and no temporary file behind.
"""

from __future__ import annotations

import os
import re
import shutil
import sqlite3
import tempfile
import time
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd

from faultmap.errors import OutputError
from faultmap.io.outputs import recover_outputs, temporary_name

__all__ = ["check_target", "write_gpkg", "check_conformance", "sanitize_columns", "GPKG_APPLICATION_ID"]

#: ``PRAGMA application_id`` of a GeoPackage ("GPKG" as int32).
GPKG_APPLICATION_ID = 1196444487

_SQL_RESERVED = {
    "select", "from", "where", "table", "index", "order", "group", "by", "insert", "update", "delete",
    "create", "drop", "alter", "join", "on", "as", "and", "or", "not", "null", "primary", "values",
    "into", "limit", "offset", "union", "all", "distinct", "case", "when", "then", "else", "end", "default",
    "check", "references", "unique", "column", "add", "set", "having", "in", "is", "like", "between",
}  # fmt: skip


#: Free space an output folder must have before a run starts, bytes (our margin for the GeoPackage,
#: its journal and the figures of a regional run).
MIN_FREE_BYTES = 64 * 1024**2


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale_temporaries(target, folders=()) -> list[Path]:
    """Remove what killed runs left beside ``target``: hidden temporary GeoPackages, journals, figure folders.

    A temporary is stale when the process whose id its name carries is gone (names without an id,
    from older versions, when older than an hour). Files of a run still writing are left alone.

    Returns
    -------
    list of pathlib.Path
        What was removed.
    """
    target = Path(target)
    removed: list[Path] = []
    found = set()
    for folder in {target.parent, *(Path(f) for f in folders)}:
        if folder.is_dir():
            found.update(folder.glob(f".{target.stem}.*.tmp*"))
    for q in sorted(found):
        if not q.exists() and not q.is_symlink():
            continue  # went with its main file
        sidecar = q.name.endswith(("-journal", "-wal", "-shm"))
        if sidecar and Path(str(q).rsplit("-", 1)[0]).exists():
            continue  # goes (or stays) with its main file
        tag = q.name[len(target.stem) + 2:].split(".tmp", 1)[0]  # "gpkg.PID-HEX", "figures.PID-HEX", or "HEX"
        pid = tag.rsplit(".", 1)[-1].split("-", 1)[0]
        if "-" in tag and pid.isdigit():
            stale = not _pid_alive(int(pid))
        else:
            try:
                stale = time.time() - q.stat().st_mtime > 3600
            except OSError:
                continue
        if stale:
            if q.is_dir():
                shutil.rmtree(q, ignore_errors=True)
            else:
                _remove(q)
            removed.append(q)
    return removed


def check_target(target, *, overwrite: bool, inputs=(), folders=()) -> Path:
    """Check that ``target`` can be written before any work is done.

    Parameters
    ----------
    target : str or pathlib.Path
        The ``.gpkg`` a run will write.
    overwrite : bool
        Whether an existing file may be replaced.
    inputs : iterable of path, optional
        The run's input files: the output may never be one of them (not even with ``overwrite``).
    folders : iterable of path, optional
        Other folders the run writes into (figures): left-overs of killed runs are cleared there too.

    Raises
    ------
    OutputError
        When the folder is missing or not writable, has less than :data:`MIN_FREE_BYTES` free, the
        name is not ``.gpkg``, the file is one of the inputs, or it exists and ``overwrite`` is false.
    """
    p = Path(target)
    if p.suffix.lower() != ".gpkg":
        raise OutputError(f"{p}: the output must be a GeoPackage file ending in .gpkg.")
    if not p.parent.exists():
        raise OutputError(f"{p}: output folder {p.parent} does not exist; create it first.")
    for src in inputs:
        if src is None or "://" in str(src) or str(src).startswith("/vsi"):
            continue
        q = Path(src)
        same = q.exists() and p.exists() and os.path.samefile(p, q)
        if same or q.resolve() == p.resolve():
            raise OutputError(
                f"{p}: is an input of this run ({q}); name another .gpkg so that the input is never overwritten."
            )
    if p.exists() and p.is_dir():
        raise OutputError(f"{p}: is a folder; name a .gpkg file.")
    if p.exists() and not overwrite:
        raise OutputError(f"{p}: exists already; use --overwrite (or overwrite = true) to replace it.")
    recover_outputs(p)  # a commit a killed run left half done: back to its earlier outputs, or forward
    remove_stale_temporaries(p, folders)
    try:
        fd, probe = tempfile.mkstemp(prefix=f".{p.stem}.probe.", suffix=".tmp", dir=p.parent)
        os.close(fd)
        os.unlink(probe)
    except OSError as exc:
        raise OutputError(
            f"{p}: cannot write in folder {p.parent} ({exc.strerror}); choose a folder you may write to."
        ) from None
    free = shutil.disk_usage(p.parent).free
    if free < MIN_FREE_BYTES:
        raise OutputError(
            f"{p}: only {free / 1024**2:.0f} MB free in {p.parent} (at least {MIN_FREE_BYTES // 1024**2} MB "
            "needed); free some space or choose another folder."
        )
    return p


def sanitize_columns(df: pd.DataFrame) -> pd.DataFrame:
    """Lower-case ``[a-z0-9_]`` field names, unique, no SQL reserved words."""
    mapping: dict[str, str] = {}
    seen: set[str] = set()
    geom = df.geometry.name if isinstance(df, gpd.GeoDataFrame) else None
    for col in df.columns:
        if col == geom:
            continue
        new = re.sub(r"[^a-z0-9_]", "_", str(col).lower()).strip("_") or "field"
        if new[0].isdigit():
            new = "f_" + new
        if new in _SQL_RESERVED:
            new = new + "_"
        base, i = new, 2
        while new in seen or new == "fid":
            new = f"{base}_{i}"
            i += 1
        seen.add(new)
        mapping[col] = new
    out = df.rename(columns=mapping)
    return out


def _prepare_layer(name: str, df, crs):
    if isinstance(df, gpd.GeoDataFrame):
        out = df.copy()
        if out.crs is None:
            out = out.set_crs(crs)
        elif not out.crs.equals(crs):
            out = out.to_crs(crs)
    else:
        out = pd.DataFrame(df).copy()
    out = sanitize_columns(out)
    for col in out.columns:
        if isinstance(out, gpd.GeoDataFrame) and col == out.geometry.name:
            continue
        s = out[col]
        if s.dtype == object or str(s.dtype).startswith("string"):
            out[col] = s.map(lambda v: None if v is None or (isinstance(v, float) and np.isnan(v)) else str(v))
        elif str(s.dtype).startswith("datetime64") and getattr(s.dt, "tz", None) is None:
            out[col] = s.dt.tz_localize("UTC")
    return out


def _write_one(path: Path, name: str, df) -> None:
    import pyogrio

    kwargs = {}
    if isinstance(df, gpd.GeoDataFrame):
        kwargs["promote_to_multi"] = False
    pyogrio.write_dataframe(df, path, layer=name, driver="GPKG", **kwargs)


#: First spatial-reference id of our own for a CRS written exactly (above the registered EPSG codes).
OWN_SRS_ID = 100000


def _loosely_matched(path: Path, layer: str, crs) -> bool:
    """Whether ``layer`` reads back in a CRS other than ``crs`` with the same ellipsoid and projection.

    That is the writer naming a custom CRS by a registered code whose datum differs: the coordinates
    are right and only the label is loose. Any other difference stays an error for the caller.
    """
    import pyogrio
    from pyproj import CRS

    text = pyogrio.read_info(path, layer=layer).get("crs")
    if not text:
        return False
    back = CRS.from_user_input(text)
    if back.equals(crs) or not (back.is_projected and crs.is_projected):
        return False
    ea, eb = back.ellipsoid, crs.ellipsoid
    oa, ob = back.coordinate_operation, crs.coordinate_operation
    if ea is None or eb is None or oa is None or ob is None or oa.method_name != ob.method_name:
        return False
    same_ellipsoid = abs(ea.semi_major_metre - eb.semi_major_metre) < 1e-6 and abs(
        ea.inverse_flattening - eb.inverse_flattening) < 1e-9
    pa, pb = [(q.name, q.value) for q in oa.params], [(q.name, q.value) for q in ob.params]
    same_params = len(pa) == len(pb) and all(n1 == n2 and abs(v1 - v2) < 1e-9 for (n1, v1), (n2, v2) in zip(pa, pb, strict=True))
    return same_ellipsoid and same_params and back.axis_info[0].unit_name == crs.axis_info[0].unit_name


def _pin_crs(path: Path, layers: list[str], crs) -> int:
    """Give ``layers`` a spatial-reference row of our own holding ``crs``'s WKT, exactly.

    GDAL's GeoPackage writer may identify a custom CRS (for example a transverse Mercator on GRS80
    given by its parameters) with a registered EPSG code whose datum differs; the layers would then
    read back in another CRS. The row's ``organization`` is ``FAULTMAP`` and its ``definition`` the
    WKT of ``crs`` (GeoPackage 1.2, table ``gpkg_spatial_ref_sys``).

    Returns
    -------
    int
        The spatial-reference id used.
    """
    import sqlite3

    con = sqlite3.connect(path)
    try:
        with con:
            top = con.execute("SELECT max(srs_id) FROM gpkg_spatial_ref_sys").fetchone()[0] or 0
            srs_id = max(OWN_SRS_ID, int(top) + 1)
            con.execute(
                "INSERT INTO gpkg_spatial_ref_sys (srs_name, srs_id, organization, organization_coordsys_id, "
                "definition, description) VALUES (?, ?, 'FAULTMAP', ?, ?, ?)",
                (crs.name or "working CRS", srs_id, srs_id, crs.to_wkt("WKT1_GDAL"),
                 "working CRS of a faultmap run, written exactly (no registered code matches it)"),
            )
            marks = ",".join("?" * len(layers))
            con.execute(f"UPDATE gpkg_geometry_columns SET srs_id = ? WHERE table_name IN ({marks})", (srs_id, *layers))
            con.execute(f"UPDATE gpkg_contents SET srs_id = ? WHERE table_name IN ({marks})", (srs_id, *layers))
    finally:
        con.close()
    return srs_id


def write_gpkg(target, layers: dict, *, crs, overwrite: bool = False) -> Path:
    """Write all ``layers`` of a run into ``target`` atomically.

    Parameters
    ----------
    target : str or pathlib.Path
        The ``.gpkg`` to create or replace.
    layers : dict
        Layer name -> GeoDataFrame (written in ``crs``) or DataFrame
        (attribute-only table).
    crs : pyproj.CRS
        Working CRS; every geometry layer is written in it and re-read to
        check it survived exactly.
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    pathlib.Path
        The written file.

    Raises
    ------
    OutputError
        Target not writable, CRS changed on writing, or the write failed; the
        earlier file (if any) is left byte-for-byte intact.
    """
    target = check_target(target, overwrite=overwrite)
    tmp = stage_gpkg(target, layers, crs=crs)
    existed = target.exists()
    try:
        os.replace(tmp, target)
    except BaseException as exc:
        _remove(tmp)
        if isinstance(exc, OSError):
            kept = "the earlier result is unchanged" if existed else "nothing was written"
            raise OutputError(f"{target}: writing failed: {exc.strerror or exc}; {kept}.") from exc
        raise
    return target


def stage_gpkg(target, layers: dict, *, crs) -> Path:
    """Write ``layers`` into a checked temporary GeoPackage beside ``target``; return its path.

    The caller moves it into place (:func:`write_gpkg`, or the run's joint commit of all its outputs
    in :mod:`faultmap.io.outputs`). Checks: the CRS of each geometry layer read back equals ``crs``
    (a custom CRS is written exactly, see :func:`_pin_crs`) and the file is a conformant GeoPackage.

    Raises
    ------
    OutputError
        The CRS changed on writing, the file is not conformant, or the write failed; no temporary
        file is left.
    """
    import pyogrio

    target = Path(target)
    tmp = temporary_name(target, "gpkg", ".gpkg")
    existed = target.exists()
    try:
        for name, df in layers.items():
            if df is None:
                continue
            _write_one(tmp, name, _prepare_layer(name, df, crs))
        geo = [name for name, df in layers.items() if isinstance(df, gpd.GeoDataFrame)]
        if geo and _loosely_matched(tmp, geo[0], crs):
            _pin_crs(tmp, geo, crs)  # a custom CRS the writer matched loosely to a registered one
        for name, df in layers.items():
            if isinstance(df, gpd.GeoDataFrame):
                info = pyogrio.read_info(tmp, layer=name)
                from pyproj import CRS

                back = CRS.from_user_input(info["crs"]) if info.get("crs") else None
                if back is None or not back.equals(crs):
                    raise OutputError(
                        f"{target}: layer '{name}' CRS changed on writing "
                        f"({crs.name} -> {back.name if back else 'none'}); not saved."
                    )
        problems = check_conformance(tmp)
        if problems:
            raise OutputError(f"{target}: the written GeoPackage is not conformant ({problems[0]}); not saved.")
    except OutputError:
        _remove(tmp)
        raise
    except KeyboardInterrupt:
        _remove(tmp)
        raise
    except Exception as exc:
        _remove(tmp)
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        hint = " (if the file is open in a GIS, close it)" if "transaction" in msg.lower() else ""
        kept = "the earlier result is unchanged" if existed else "nothing was written"
        raise OutputError(f"{target}: writing failed: {msg}{hint}; {kept}.") from exc
    return tmp


def _remove(p: Path) -> None:
    for q in (p, Path(str(p) + "-journal"), Path(str(p) + "-wal"), Path(str(p) + "-shm")):
        try:
            q.unlink()
        except FileNotFoundError:
            pass


def check_conformance(path) -> list[str]:
    """Read-only GeoPackage checks with sqlite3; an empty list means conformant.

    Checks ``application_id`` (1196444487), ``user_version`` (10200-10499),
    ``integrity_check``, the presence and consistency of the ``gpkg_*``
    system tables, one rtree index per geometry column, and that no CRS is
    left undefined.
    """
    problems: list[str] = []
    uri = Path(path).resolve().as_uri() + "?mode=ro"
    con = sqlite3.connect(uri, uri=True)
    try:
        app = con.execute("PRAGMA application_id").fetchone()[0]
        if app != GPKG_APPLICATION_ID:
            problems.append(f"application_id {app}")
        ver = con.execute("PRAGMA user_version").fetchone()[0]
        if not 10200 <= ver <= 10499:
            problems.append(f"user_version {ver}")
        ok = con.execute("PRAGMA integrity_check").fetchone()[0]
        if ok != "ok":
            problems.append(f"integrity_check {ok}")
        tables = {r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type IN ('table','view')")}
        for t in ("gpkg_spatial_ref_sys", "gpkg_contents", "gpkg_geometry_columns"):
            if t not in tables:
                problems.append(f"missing {t}")
        if problems:
            return problems
        srs = {r[0] for r in con.execute("SELECT srs_id FROM gpkg_spatial_ref_sys")}
        for name, dtype, srs_id in con.execute("SELECT table_name, data_type, srs_id FROM gpkg_contents"):
            if name not in tables:
                problems.append(f"gpkg_contents lists missing table {name}")
            if dtype == "features" and srs_id not in srs:
                problems.append(f"layer {name} has unknown srs_id {srs_id}")
            if dtype == "features" and srs_id in (0, -1):
                problems.append(f"layer {name} has an undefined CRS")
        for tname, col in con.execute("SELECT table_name, column_name FROM gpkg_geometry_columns"):
            if f"rtree_{tname}_{col}" not in tables:
                problems.append(f"no rtree index on {tname}.{col}")
    finally:
        con.close()
    return problems
