"""arcwindow numerical core: Lambert arcs, Kepler propagation, ephemerides and window grids.

Numbers only: no plotting or web imports. Public functions take and return numpy arrays whose
names carry their units (``r_km``, ``tof_s``, ``c3_km2_s2``).
"""

ENGINE_VERSION = "0.2.0"
