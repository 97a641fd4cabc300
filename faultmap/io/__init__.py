"""Input and output at the edges: vector layers, the lazy DEM, atomic GeoPackage writing."""
