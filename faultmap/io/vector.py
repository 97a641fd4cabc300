"""Reading vector layers (traces, transects, study areas...) from any GDAL source.

A source is a local path, a URL or a GDAL virtual path (see :mod:`faultmap.io.locations`); it is
kept as text, so a URL's ``//`` survives, and messages name it as the user gave it.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd

from faultmap.errors import CRSError, InputError, InputFileError
from faultmap.io.locations import gdal_path, location_kind

__all__ = ["read_layer", "list_layers"]


def list_layers(path) -> list[str]:
    """Names of the layers of a vector source.

    Raises
    ------
    InputFileError
        Missing, unreadable or non-vector file.
    """
    import pyogrio

    p = str(path)
    local = location_kind(p) == "local"
    if local and not Path(gdal_path(p)).expanduser().exists():
        raise InputFileError(f"{p}: file not found; check the path.")
    try:
        layers = pyogrio.list_layers(gdal_path(p))
    except Exception as exc:  # pyogrio raises DataSourceError and friends
        if not local:
            raise InputFileError(f"{p}: cannot open the remote or virtual source (GDAL: {_first_line(exc)}).") from exc
        raise InputFileError(
            f"{p}: not a vector file GDAL can read ({_first_line(exc)}); export the layer as GeoPackage or Shapefile."
        ) from exc
    return [str(row[0]) for row in layers]


def read_layer(path, *, layer: str | None = None, what: str = "faults", crs=None) -> gpd.GeoDataFrame:
    """Read one vector layer, checking that it is spatial and has a CRS.

    Parameters
    ----------
    path : str or pathlib.Path
        Any vector source GDAL reads.
    layer : str, optional
        Layer name; required when the source holds several layers.
    what : str
        What the layer is (for messages): ``faults``, ``transects``...
    crs : str or pyproj.CRS, optional
        CRS to assign when the layer has none (``--crs``). A layer that has a
        CRS keeps it.

    Returns
    -------
    geopandas.GeoDataFrame
        The features, unmodified, with a CRS.

    Raises
    ------
    InputFileError, InputError, CRSError
        With one line naming the file, the layer and what to do.
    """
    import pyogrio
    from pyproj import CRS

    p = str(path)
    names = list_layers(p)
    if not names:
        raise InputFileError(f"{p}: the file holds no layers.")
    if layer is None:
        if len(names) > 1:
            raise InputError(
                f"{p}: holds {len(names)} layers ({', '.join(names)}); name the {what} layer "
                f"(--{what.replace('_', '-')}-layer or {what}_layer in the project file)."
            )
        layer = names[0]
    elif layer not in names:
        raise InputError(f"{p}: layer '{layer}' not found; layers in the file: {', '.join(names)}.")
    try:
        gdf = pyogrio.read_dataframe(gdal_path(p), layer=layer)
    except Exception as exc:
        raise InputFileError(f"{p}, layer '{layer}': cannot read ({_first_line(exc)}).") from exc
    where = f"{p}, layer '{layer}'"
    if not isinstance(gdf, gpd.GeoDataFrame) or gdf.geometry is None or "geometry" not in gdf:
        raise InputError(f"{where}: has no geometry column; give a spatial layer of {what}.")
    if len(gdf) == 0:
        raise InputError(f"{where}: the layer is empty; it holds no {what}.")
    if gdf.crs is None:
        if crs is None:
            raise CRSError(f"{where}: the layer has no CRS; name one with --crs (e.g. --crs EPSG:32633).")
        try:
            gdf = gdf.set_crs(CRS.from_user_input(crs))
        except Exception as exc:
            raise CRSError(f"--crs {crs!r}: not a CRS pyproj understands ({_first_line(exc)}).") from exc
    gdf.attrs["source"] = f"{p}, layer '{layer}'"
    gdf.attrs["layer"] = layer
    return gdf


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__
