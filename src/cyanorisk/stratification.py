"""Stratification of a water column from temperatures at more than one depth.

- :func:`water_density_kg_m3`: density of fresh water from its temperature (Martin &
  McCutcheon 1999).
- :func:`schmidt_stability_j_m2`: the Schmidt stability of a profile, the work per unit of
  surface area needed to mix the column to uniform density (Idso 1973).
- :func:`two_sensor_stability_j_m2`: the same for many two-sensor profiles at once (a surface
  and a bottom thermistor), the temperature taken as linear between them.

A stable column (warm light water over cold heavy water) resists wind mixing and lets buoyant
cyanobacteria stay near the light: stratification is a known condition of blooms (Paerl &
Huisman 2008, Science 320:57-58, from memory).

References
----------
.. [1] Idso, S. B. (1973). On the concept of lake stability. Limnol. Oceanogr. 18, 681-683.
.. [2] Martin, J. L. & McCutcheon, S. C. (1999). Hydrodynamics and Transport for Water Quality
   Modeling. Lewis Publishers (the density formula; REFERENCES.md).
"""

from __future__ import annotations

import numpy as np

G_M_S2 = 9.81
"""Acceleration of gravity [m s-2], the value of the worked example checked in the tests."""
LAYER_M = 0.1
"""Thickness [m] of the layers the stability integral is summed over."""


def water_density_kg_m3(temp_c: np.ndarray) -> np.ndarray:
    """Density of fresh water [kg m-3] at temperature ``temp_c`` [degC]:
    rho = 1000 (1 - (T + 288.9414) / (508929.2 (T + 68.12963)) (T - 3.9863)^2)
    (Martin & McCutcheon 1999); about 999.97 at 4 degC and 997.05 at 25 degC."""
    t = np.asarray(temp_c, dtype=float)
    return 1000.0 * (1.0 - (t + 288.9414) / (508929.2 * (t + 68.12963)) * (t - 3.9863) ** 2)


def _layers(top_m: float, bottom_m: float, area_depths_m: np.ndarray,
            areas_m2: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Layer depths from ``top_m`` down to ``bottom_m`` in steps of :data:`LAYER_M`, their
    areas interpolated in the hypsography, and the depth of the centre of volume [m]."""
    z = np.arange(top_m, bottom_m, LAYER_M)
    area = np.interp(z, np.asarray(area_depths_m, float), np.asarray(areas_m2, float))
    return z, area, float(z @ area / area.sum())


def schmidt_stability_j_m2(temp_c: np.ndarray, depths_m: np.ndarray, area_depths_m: np.ndarray,
                           areas_m2: np.ndarray) -> float:
    """Schmidt stability of one temperature profile [J m-2] (Idso 1973):

    S = (g / A0) * sum over layers of (z - z_v) * rho(z) * A(z) * dz,

    z the depth of a layer [m], rho(z) its density [kg m-3] from the temperature interpolated
    linearly between the measured depths, A(z) its area from the hypsography [m2], A0 the area
    at the top, z_v the depth of the centre of volume, summed in layers of 0.1 m from the
    shallowest to the deepest measurement. Because the layers' (z - z_v) A(z) sum to zero, this
    equals the integral of (z - z_v) (rho(z) - rho_v) A(z) dz of the definition, rho_v the mean
    density.

    Parameters
    ----------
    temp_c, depths_m : array
        The profile: temperatures [degC] at depths [m], shallowest first.
    area_depths_m, areas_m2 : array
        The hypsography: horizontal areas [m2] at depths [m].
    """
    depths = np.asarray(depths_m, dtype=float)
    z, area, z_v = _layers(depths[0], depths[-1], area_depths_m, areas_m2)
    rho = water_density_kg_m3(np.interp(z, depths, np.asarray(temp_c, dtype=float)))
    return float(G_M_S2 / area[0] * np.sum((z - z_v) * rho * area) * LAYER_M)


def two_sensor_stability_j_m2(surface_c: np.ndarray, bottom_c: np.ndarray, top_m: float,
                              bottom_m: float, area_depths_m: np.ndarray,
                              areas_m2: np.ndarray) -> np.ndarray:
    """Schmidt stability [J m-2] of many profiles measured at two depths (``top_m`` and
    ``bottom_m`` [m]), the temperature linear between them (:func:`schmidt_stability_j_m2`);
    NaN where either temperature is missing."""
    z, area, z_v = _layers(top_m, bottom_m, area_depths_m, areas_m2)
    weight = G_M_S2 / area[0] * (z - z_v) * area * LAYER_M
    share = (z - top_m) / (bottom_m - top_m)
    surface = np.asarray(surface_c, dtype=float)[:, None]
    bottom = np.asarray(bottom_c, dtype=float)[:, None]
    out = np.empty(len(surface))
    for lo in range(0, len(surface), 20000):  # bounded memory: 20,000 profiles at a time
        hi = lo + 20000
        temp = surface[lo:hi] + (bottom[lo:hi] - surface[lo:hi]) * share
        # a row-wise sum, not a matrix product: the same profile gives the same number
        # whatever else is in the batch (BLAS may block a product differently)
        out[lo:hi] = (water_density_kg_m3(temp) * weight).sum(axis=1)
    return out
