"""arcwindow numerical core: Lambert arcs, Kepler propagation, ephemerides and window grids.

Numbers only: no plotting or web imports. Public functions take and return numpy arrays whose
names carry their units (``r_km``, ``tof_s``, ``c3_km2_s2``).
"""

from solver._compiled_cache import key_compiled_cache

ENGINE_VERSION = "0.3.1"
"""Changes whenever computed numbers change, so caches and surveys made before are not reused
(0.2.0: grid dates counted in UTC, TOF as elapsed UTC time, tie-broken best arcs, every limit
on every launch-period day, element frames with a stated obliquity; 0.3.0: mass and launch
metrics, the launch site's reach and the minimum delivered mass in the limits; 0.3.1: flyby
periapsis found without an arc tangent per step, the same root to 1e-14 and closer to it near a
half-turn)."""

key_compiled_cache()  # before any kernel is loaded: compiled code always matches this source
