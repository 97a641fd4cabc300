"""The fictional Drovessin Graben demo area of faultmap.

``write_demo_area(folder)`` writes a fault layer, a DEM built physically from
known fault slips, transects, truth tables and a project file; see
``demo_area/README.md``.
"""

from demo_area.scenario import (
    CRS_EPSG,
    SCENARIO_NAME,
    build_demo_scene,
    demo_faults,
    demo_grid,
    demo_transects,
    write_demo_area,
)

__all__ = [
    "CRS_EPSG",
    "SCENARIO_NAME",
    "build_demo_scene",
    "demo_faults",
    "demo_grid",
    "demo_transects",
    "write_demo_area",
]
