"""Where inputs live: local paths, URLs and GDAL virtual paths.

An input is given as text, in one of three forms:

* a local path (``dem.tif``, ``/data/dem.vrt``), relative to the current folder (or to the project
  file's folder in a project file);
* a URL GDAL reads: ``http(s)://`` and ``ftp://`` through ``/vsicurl/``, ``s3://`` through
  ``/vsis3/``, ``gs://`` through ``/vsigs/``, ``az://`` through ``/vsiaz/``, ``abfs://`` through
  ``/vsiadls/``, ``oss://`` through ``/vsioss/``, ``swift://`` through ``/vsiswift/`` (see
  :data:`URL_SCHEMES`);
* a GDAL virtual path (``/vsicurl/https://...``, ``/vsis3/bucket/key.tif``,
  ``/vsizip/tiles.zip/dem.tif``...), passed to GDAL as it is.

A local path is never handed to GDAL through :class:`pathlib.Path` once it could be a URL (a
``Path`` collapses the ``//`` of ``https://``). :func:`absolute` makes local paths (and the local
archive inside a ``/vsizip/``-like path) absolute, so that a path means the same file on a Dask
worker running in another folder; URLs and network paths are left as they are.

:func:`check_readable` opens an input once before any computing and stops with one line naming
the input and, for a remote one, what GDAL answered. :func:`remote_fingerprint` describes a remote
input cheaply (size, modification time and ETag as the server reports them through GDAL) for
``run_info``, instead of hashing a file that may be gigabytes away. :func:`remote_options` are the
GDAL settings every remote read runs under (in a scoped ``rasterio.Env``, never set globally).
"""

from __future__ import annotations

import os
import re
from pathlib import Path

from faultmap.errors import InputFileError

__all__ = [
    "URL_SCHEMES",
    "RASTER_KINDS",
    "REMOTE_GDAL_OPTIONS",
    "location_kind",
    "is_remote",
    "gdal_path",
    "absolute",
    "archive_parts",
    "remote_options",
    "check_readable",
    "remote_fingerprint",
]

#: URL schemes and the GDAL virtual file system that reads each (GDAL's own naming, "GDAL Virtual
#: File Systems" page of the GDAL documentation).
URL_SCHEMES = {
    "http": "/vsicurl/",
    "https": "/vsicurl/",
    "ftp": "/vsicurl/",
    "s3": "/vsis3/",
    "gs": "/vsigs/",
    "az": "/vsiaz/",
    "abfs": "/vsiadls/",
    "oss": "/vsioss/",
    "swift": "/vsiswift/",
}
#: Virtual file systems that read over the network (a path holding one anywhere is remote).
_NETWORK_VSI = (
    "/vsicurl",
    "/vsis3",
    "/vsigs",
    "/vsiaz",
    "/vsiadls",
    "/vsioss",
    "/vsiswift",
    "/vsiwebhdfs",
    "/vsihdfs",
)
#: Virtual file systems that read inside an archive or compressed file, followed by that file's path.
_ARCHIVE_VSI = ("/vsizip/", "/vsitar/", "/vsigzip/", "/vsi7z/", "/vsirar/")
#: Input kinds read as rasters; every other kind of :data:`faultmap.registry.INPUT_KINDS` is a vector layer.
RASTER_KINDS = frozenset({"dem"})

#: GDAL settings for reading a remote input, applied in a scoped ``rasterio.Env`` around each open
#: and read (GDAL configuration options, "Configuration options" page of the GDAL documentation):
#:
#: * ``GDAL_DISABLE_READDIR_ON_OPEN=EMPTY_DIR``: do not list the remote folder on open to look for
#:   side-car files (``.aux.xml``, ``.ovr``, ``.msk``); on web storage a listing is one more request
#:   per open, often a large page, and each window read opens the file again;
#: * ``GDAL_HTTP_MERGE_CONSECUTIVE_RANGES=YES``: adjacent blocks of one window in one range request;
#: * ``GDAL_HTTP_MAX_RETRY=3``, ``GDAL_HTTP_RETRY_DELAY=1``: retry a throttled or briefly failing
#:   server (HTTP 429, 502, 503, 504) three times, 1 s apart, instead of failing a run;
#: * ``GDAL_HTTP_CONNECTTIMEOUT=15``, ``GDAL_HTTP_TIMEOUT=120``: give up on a server that does not
#:   connect within 15 s or answer a request within 120 s (s).
#:
#: GDAL's process-wide cache of downloaded ranges (``CPL_VSIL_CURL_CACHE_SIZE``, 16 MB by default)
#: keeps the file's header and recent blocks between the opens of one process; it is read once
#: when GDAL starts, so it is left to the user's environment.
REMOTE_GDAL_OPTIONS = {
    "GDAL_DISABLE_READDIR_ON_OPEN": "EMPTY_DIR",
    "GDAL_HTTP_MERGE_CONSECUTIVE_RANGES": "YES",
    "GDAL_HTTP_MAX_RETRY": "3",
    "GDAL_HTTP_RETRY_DELAY": "1",
    "GDAL_HTTP_CONNECTTIMEOUT": "15",
    "GDAL_HTTP_TIMEOUT": "120",
}

_SCHEME = re.compile(r"^([A-Za-z][A-Za-z0-9+.-]*)://")


def _scheme(text: str) -> str | None:
    m = _SCHEME.match(text)
    return m.group(1).lower() if m else None


def location_kind(location) -> str:
    """``local``, ``url`` or ``virtual`` (a GDAL ``/vsi...`` path).

    Parameters
    ----------
    location : str or os.PathLike
        An input as the user gave it.
    """
    text = os.fspath(location)
    scheme = _scheme(text)
    if scheme is not None and scheme != "file":
        return "url"
    if text.startswith("/vsi"):
        return "virtual"
    return "local"


def is_remote(location) -> bool:
    """Whether GDAL reads ``location`` over the network (a URL, or a path through ``/vsicurl/``, ``/vsis3/``...)."""
    text = os.fspath(location)
    if location_kind(text) == "url":
        return True
    return any(f"{v}/" in text or f"{v}?" in text or f"{v}_streaming/" in text for v in _NETWORK_VSI)


def gdal_path(location) -> str:
    """Return the name GDAL opens for ``location``.

    URLs become virtual paths (``https://h/d.tif`` -> ``/vsicurl/https://h/d.tif``,
    ``s3://b/k.tif`` -> ``/vsis3/b/k.tif``); ``file://`` URLs become local paths; local and
    virtual paths are returned as they are (as text, never through :class:`pathlib.Path`).

    Raises
    ------
    InputFileError
        A URL scheme GDAL has no virtual file system for.
    """
    text = os.fspath(location)
    scheme = _scheme(text)
    if scheme is None:
        return text
    if scheme == "file":
        return text[len("file://") :]
    if scheme not in URL_SCHEMES:
        raise InputFileError(
            f"{text}: GDAL reads no '{scheme}://' addresses; give a local path, an address starting with "
            f"{', '.join(s + '://' for s in URL_SCHEMES)}, or a GDAL virtual path (/vsicurl/...)."
        )
    prefix = URL_SCHEMES[scheme]
    return prefix + (text if prefix == "/vsicurl/" else text[len(scheme) + 3 :])


def absolute(location, base=None) -> str:
    """``location`` with a local path made absolute against ``base`` (default: the current folder).

    URLs and network paths are returned unchanged. In an archive path (``/vsizip/tiles.zip/dem.tif``)
    the archive's local path is made absolute (``/vsizip//data/tiles.zip/dem.tif``), when it can be
    found under ``base``.

    Parameters
    ----------
    location : str or os.PathLike
    base : str or os.PathLike, optional
        Folder that relative paths are relative to.

    Returns
    -------
    str
    """
    text = os.fspath(location)
    base_p = Path(base) if base is not None else Path.cwd()
    kind = location_kind(text)
    if kind == "url":
        return text
    if kind == "local":
        p = Path(gdal_path(text)).expanduser()  # a file:// URL is a local path
        return str(p if p.is_absolute() else (base_p / p).resolve())
    parts = archive_parts(text, base_p)
    if parts is None:
        return text
    prefix, archive, inner = parts
    return prefix + str(archive.resolve()) + ("/" + inner if inner else "")


def archive_parts(location, base=None):
    """Split a path into a local archive (``/vsizip/tiles.zip/dem.tif``) into its three parts.

    Parameters
    ----------
    location : str or os.PathLike
    base : str or os.PathLike, optional
        Folder a relative archive path is relative to (default: the current folder).

    Returns
    -------
    tuple of (str, pathlib.Path, str) or None
        The prefix (``/vsizip/``), the archive file (absolute or under ``base``) and the path inside
        it; None when ``location`` is not such a path or the archive cannot be found.
    """
    text = os.fspath(location)
    if is_remote(text):
        return None
    base_p = Path(base) if base is not None else Path.cwd()
    for prefix in _ARCHIVE_VSI:
        if not text.startswith(prefix):
            continue
        rest = text[len(prefix) :]
        if rest.startswith("{"):
            return None  # GDAL's {archive} form: left as written
        root, rest = (Path("/"), rest[1:]) if rest.startswith("/") else (base_p, rest)
        parts = rest.split("/")
        for i in range(1, len(parts) + 1):
            candidate = root.joinpath(*parts[:i])
            if candidate.is_file():
                return prefix, candidate, "/".join(parts[i:])
        return None
    return None


def remote_options(location) -> dict:
    """GDAL settings to read ``location`` with: :data:`REMOTE_GDAL_OPTIONS` when it is remote, else none."""
    return dict(REMOTE_GDAL_OPTIONS) if is_remote(location) else {}


def _gdal_answer(exc: BaseException) -> str:
    text = " ".join(str(exc).split())
    return text or type(exc).__name__


def check_readable(kind: str, location, *, raster: bool | None = None) -> None:
    """Stop with one line unless ``location`` exists and GDAL opens it.

    A local file is only checked to exist (it is opened, with file-specific messages, when it is
    read); a URL or virtual path is opened once with GDAL, so that an unreachable server, a missing
    object or a forbidden bucket stops the run before any computing.

    Parameters
    ----------
    kind : str
        The input kind (``dem``, ``faults``...), named in the message.
    location : str or os.PathLike
    raster : bool, optional
        Open as a raster (``rasterio``) or a vector source (``pyogrio``); default: rasters for
        :data:`RASTER_KINDS`.

    Raises
    ------
    InputFileError
    """
    text = os.fspath(location)
    raster = (kind in RASTER_KINDS) if raster is None else raster
    if location_kind(text) == "local":
        p = Path(gdal_path(text)).expanduser()
        if not p.exists():
            what = "DEM file" if kind == "dem" else f"{kind} file"
            raise InputFileError(f"{text}: {what} not found (input '{kind}'); check the path.")
        return
    name = gdal_path(text)
    where = "remote" if is_remote(text) else "virtual"
    try:
        if raster:
            import rasterio

            with rasterio.Env(**remote_options(text)):
                with rasterio.open(name):
                    pass
        else:
            import pyogrio

            pyogrio.list_layers(name)
    except Exception as exc:  # noqa: BLE001 - rasterio and pyogrio raise their own classes
        todo = (
            "check the address, that the server is up and your access to it"
            if where == "remote"
            else "check the archive's path and the path inside it"
        )
        raise InputFileError(
            f"{text}: cannot open the {where} input '{kind}' (GDAL: {_gdal_answer(exc)}); {todo}."
        ) from exc


# ------------------------------------------------------------------ cheap remote fingerprints
_LIBGDAL = None


def _libgdal():
    """Load rasterio's GDAL library through ctypes (for the two VSI calls rasterio does not expose), or None."""
    global _LIBGDAL
    if _LIBGDAL is not None:
        return _LIBGDAL or None
    import ctypes
    import ctypes.util
    import glob

    import rasterio
    import rasterio._base  # noqa: F401 - loads the library first, so the same one is found

    here = Path(rasterio.__file__).resolve().parent
    names = sorted(glob.glob(str(here.parent / "rasterio.libs" / "libgdal*.so*")))
    names += sorted(glob.glob(str(here.parent / "rasterio" / ".dylibs" / "libgdal*.dylib")))
    found = ctypes.util.find_library("gdal")
    names += [found] if found else []
    for name in names:
        try:
            lib = ctypes.CDLL(name)
            lib.VSIGetFileMetadata.restype = ctypes.POINTER(ctypes.c_char_p)
            lib.VSIGetFileMetadata.argtypes = [ctypes.c_char_p, ctypes.c_char_p, ctypes.c_void_p]
            lib.CSLDestroy.argtypes = [ctypes.c_void_p]
            lib.VSIFOpenL.restype = ctypes.c_void_p
            lib.VSIFOpenL.argtypes = [ctypes.c_char_p, ctypes.c_char_p]
            lib.VSIFSeekL.argtypes = [ctypes.c_void_p, ctypes.c_uint64, ctypes.c_int]
            lib.VSIFTellL.restype = ctypes.c_uint64
            lib.VSIFTellL.argtypes = [ctypes.c_void_p]
            lib.VSIFCloseL.argtypes = [ctypes.c_void_p]
        except (OSError, AttributeError):
            continue
        _LIBGDAL = lib
        return lib
    _LIBGDAL = False
    return None


def _headers(lib, name: str) -> dict:
    """HTTP headers of a network file as GDAL received them (``HEADERS`` metadata domain), lower-case keys."""
    ptr = lib.VSIGetFileMetadata(name.encode(), b"HEADERS", None)
    out = {}
    if ptr:
        i = 0
        while ptr[i] is not None:
            key, _, value = ptr[i].decode("utf-8", "replace").partition("=")
            out[key.strip().lower()] = value.strip()
            i += 1
        lib.CSLDestroy(ptr)
    return out


def _size(lib, name: str) -> int | None:
    """Size in bytes through GDAL's virtual file API (seek to the end), or None."""
    fh = lib.VSIFOpenL(name.encode(), b"rb")
    if not fh:
        return None
    try:
        if lib.VSIFSeekL(fh, 0, 2) != 0:  # SEEK_END
            return None
        return int(lib.VSIFTellL(fh))
    finally:
        lib.VSIFCloseL(fh)


def remote_fingerprint(location) -> str:
    """Describe a remote or virtual input's version cheaply and stably, for ``run_info``.

    Not a hash of the content (that would download the whole file): the size, the modification
    time and the ETag as the server reports them through GDAL (HTTP headers of ``/vsicurl/``,
    ``/vsis3/``, ``/vsigs/``...), whichever it exposes, else the size GDAL finds.

    Returns
    -------
    str
        E.g. ``remote (size, last-modified, etag; not a content hash): size=4195188;
        last-modified=Thu, 03 Dec 2026 21:50:08 GMT; etag="abc"``, or ``remote: not available (...)``.
    """
    name = gdal_path(location)
    lib = _libgdal()
    if lib is None:
        return "remote: not available (GDAL's virtual file API could not be loaded)"
    import rasterio

    with rasterio.Env(**remote_options(location)):
        headers = _headers(lib, name) if is_remote(location) else {}
        size = headers.get("content-length") or headers.get("x-ms-blob-content-length")
        if size is None:
            n = _size(lib, name)
            size = None if n is None else str(n)
    parts = [("size", size), ("last-modified", headers.get("last-modified")), ("etag", headers.get("etag"))]
    parts = [(k, v) for k, v in parts if v]
    where = "remote" if is_remote(location) else "virtual"
    if not parts:
        return f"{where}: not available (GDAL reports neither size, modification time nor ETag)"
    return f"{where} ({', '.join(k for k, _ in parts)}; not a content hash): " + "; ".join(
        f"{k}={v}" for k, v in parts
    )
