"""faultmap: measured numbers from normal-fault traces and a DEM.

Throw, scaling, extension, strain, rift width and hazard screening come out as
GeoPackage layers and figures.

The Python API mirrors the command line: :func:`run_tools` runs named tools,
:func:`run_project` runs a project (TOML) file. Analyses live
in one package per analysis (``faultmap.throw``, ``faultmap.population``, ``faultmap.extension``,
``faultmap.rift``, ``faultmap.hazard``...).
"""

from __future__ import annotations

__version__ = "0.1.0"

from faultmap.errors import FaultmapError

__all__ = ["__version__", "FaultmapError", "run_tools", "run_project", "load_tools"]


def __getattr__(name):  # lazy: importing faultmap stays light (no matplotlib, no rasterio)
    if name == "run_tools":
        from faultmap.runner import run_tools

        return run_tools
    if name == "run_project":
        from faultmap.project import run_project

        return run_project
    if name == "load_tools":
        from faultmap.registry import load_tools

        return load_tools
    raise AttributeError(name)
