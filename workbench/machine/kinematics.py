"""Closed-form kinematic frequencies: rolling-element bearing defects and planetary stages.

:func:`bearing_frequencies` and :func:`planetary_frequencies` accept any consistent speed unit
(Hz, orders, rev/min) and return frequencies in that unit, as :class:`BearingFrequencies` and
:class:`PlanetaryFrequencies`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from workbench.errors import InputError
from workbench.machine._fields import _check_int, _check_real

__all__ = [
    "BearingFrequencies",
    "bearing_frequencies",
    "PlanetaryFrequencies",
    "planetary_frequencies",
]


@dataclass(frozen=True)
class BearingFrequencies:
    """Defect frequencies of a rolling-element bearing (same unit as the race speeds given).

    Attributes
    ----------
    ftf : float or ndarray
        Fundamental train (cage) frequency, ``|f_c|``.
    bpfo : float or ndarray
        Ball pass frequency, outer race.
    bpfi : float or ndarray
        Ball pass frequency, inner race.
    bsf : float or ndarray
        Ball (rolling element) spin frequency; a defect striking both races shows at 2 x BSF.
    """

    ftf: float | np.ndarray
    bpfo: float | np.ndarray
    bpfi: float | np.ndarray
    bsf: float | np.ndarray


def bearing_frequencies(
    inner,
    outer,
    *,
    rolling_elements: int,
    element_diameter: float,
    pitch_diameter: float,
    contact_angle_deg: float = 0.0,
) -> BearingFrequencies:
    """Rolling-element bearing defect frequencies for any inner and outer race speeds.

    With ``r = (d / D) cos(alpha)`` the cage turns at ``f_c = f_i (1 - r)/2 + f_o (1 + r)/2``
    and ``BPFO = N |f_o - f_c|``, ``BPFI = N |f_i - f_c|``,
    ``BSF = D / (2 d) |f_i - f_o| (1 - r**2)``, ``FTF = |f_c|``.

    Parameters
    ----------
    inner, outer : float or array_like
        Inner and outer race speeds (signed, any consistent unit: Hz, orders...); broadcast
        together.
    rolling_elements : int
        Number of rolling elements N.
    element_diameter, pitch_diameter : float
        Rolling element diameter d and pitch diameter D, same length unit, 0 < d < D.
    contact_angle_deg : float, optional
        Contact angle alpha in degrees, 0 <= alpha < 90 (default 0).

    Returns
    -------
    BearingFrequencies
        `ftf`, `bpfo`, `bpfi`, `bsf` in the unit of the race speeds, broadcast shape.

    References
    ----------
    .. [1] R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A tutorial",
       Mechanical Systems and Signal Processing 25(2):485-520, 2011.

    Examples
    --------
    >>> f = bearing_frequencies(1.0, 0.0, rolling_elements=9, element_diameter=0.3126,
    ...                         pitch_diameter=1.537)
    >>> print(f"{f.bpfi:.4f} {f.bpfo:.4f} {f.ftf:.4f} {2 * f.bsf:.4f}")
    5.4152 3.5848 0.3983 4.7134
    """
    label = "bearing_frequencies"
    n = _check_int(label, "rolling_elements", rolling_elements, 1, cls=InputError)
    d = _check_real(label, "element_diameter", element_diameter, positive=True, cls=InputError)
    big_d = _check_real(label, "pitch_diameter", pitch_diameter, positive=True, cls=InputError)
    alpha = _check_real(label, "contact_angle_deg", contact_angle_deg, cls=InputError)
    if d >= big_d:
        raise InputError(
            f"{label}: element_diameter = {d} >= pitch_diameter = {big_d}: the rolling element "
            "diameter must be smaller than the pitch diameter"
        )
    if not 0.0 <= alpha < 90.0:
        raise InputError(f"{label}: contact_angle_deg = {alpha}: must be >= 0 and < 90")
    f_i = np.asarray(inner, dtype=float)
    f_o = np.asarray(outer, dtype=float)
    r = d / big_d * math.cos(math.radians(alpha))
    f_c = f_i * (1.0 - r) / 2.0 + f_o * (1.0 + r) / 2.0
    out = BearingFrequencies(
        ftf=np.abs(f_c),
        bpfo=n * np.abs(f_o - f_c),
        bpfi=n * np.abs(f_i - f_c),
        bsf=big_d / (2.0 * d) * np.abs(f_i - f_o) * (1.0 - r * r),
    )
    if np.ndim(f_c) == 0:
        out = BearingFrequencies(*(float(getattr(out, f.name)) for f in fields(out)))
    return out


@dataclass(frozen=True)
class PlanetaryFrequencies:
    """Characteristic frequencies of a planetary gear set (same unit as the member speeds).

    Attributes
    ----------
    mesh : float or ndarray
        Gear mesh frequency ``f_m = Z_s |f_s - f_c| = Z_r |f_r - f_c|``.
    planet_pass : float or ndarray
        Planets passing a point of the ring, ``N_p |f_r - f_c|``.
    planet_spin : float or ndarray
        Planet speed relative to the carrier, ``f_m / Z_p``.
    sun_fault : float or ndarray
        A local sun tooth fault meeting the planets, ``N_p f_m / Z_s``.
    planet_fault : float or ndarray
        A local planet tooth fault meeting sun and ring, ``2 f_m / Z_p``.
    ring_fault : float or ndarray
        A local ring tooth fault meeting the planets, ``N_p f_m / Z_r``.
    """

    mesh: float | np.ndarray
    planet_pass: float | np.ndarray
    planet_spin: float | np.ndarray
    sun_fault: float | np.ndarray
    planet_fault: float | np.ndarray
    ring_fault: float | np.ndarray


def planetary_frequencies(
    sun,
    carrier,
    ring,
    *,
    sun_teeth: int,
    planet_teeth: int,
    ring_teeth: int,
    planets: int,
) -> PlanetaryFrequencies:
    """Mesh, planet-pass, planet-spin and tooth-fault frequencies of a planetary gear set.

    The three member speeds must satisfy the Willis equation
    ``(f_s - f_c) / (f_r - f_c) = -Z_r / Z_s``, i.e. ``Z_s (f_s - f_c) + Z_r (f_r - f_c) = 0``.

    Parameters
    ----------
    sun, carrier, ring : float or array_like
        Signed speeds f_s, f_c, f_r of sun, carrier and ring (any consistent unit), broadcast
        together; a fixed member is 0.
    sun_teeth, planet_teeth, ring_teeth : int
        Tooth counts Z_s, Z_p, Z_r.
    planets : int
        Number of planets N_p.

    Returns
    -------
    PlanetaryFrequencies
        In the unit of the member speeds, broadcast shape.

    Raises
    ------
    InputError
        If the speeds do not satisfy the Willis equation (relative tolerance 1e-9).

    References
    ----------
    .. [1] P. D. McFadden and J. D. Smith, "An explanation for the asymmetry of the modulation
       sidebands about the tooth meshing frequency in epicyclic gear vibration", Proceedings of
       the Institution of Mechanical Engineers, Part C 199(1):65-70, 1985.

    Examples
    --------
    Ring fixed, sun at 1: the carrier turns at Z_s / (Z_s + Z_r).

    >>> zs, zr = 21, 87
    >>> f = planetary_frequencies(1.0, zs / (zs + zr), 0.0, sun_teeth=zs, planet_teeth=33,
    ...                           ring_teeth=zr, planets=3)
    >>> print(f"{f.mesh:.4f} {f.planet_pass:.4f}")
    16.9167 0.5833
    """
    label = "planetary_frequencies"
    z_s, z_p, z_r, n_p = (
        _check_int(label, field, value, 1, cls=InputError)
        for field, value in (
            ("sun_teeth", sun_teeth), ("planet_teeth", planet_teeth),
            ("ring_teeth", ring_teeth), ("planets", planets),
        )
    )
    f_s, f_c, f_r = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (sun, carrier, ring)))
    sun_rel = f_s - f_c
    ring_rel = f_r - f_c
    residue = np.abs(z_s * sun_rel + z_r * ring_rel)
    scale = z_s * np.abs(sun_rel) + z_r * np.abs(ring_rel) + z_s * np.abs(f_c)
    if np.any(residue > 1e-9 * scale):
        raise InputError(
            f"{label}: the speeds sun = {sun}, carrier = {carrier}, ring = {ring} do not satisfy "
            "the Willis equation (f_s - f_c)/(f_r - f_c) = -Z_r/Z_s for "
            f"Z_s = {z_s}, Z_r = {z_r}"
        )
    mesh = z_s * np.abs(sun_rel)
    out = PlanetaryFrequencies(
        mesh=mesh,
        planet_pass=n_p * np.abs(ring_rel),
        planet_spin=mesh / z_p,
        sun_fault=n_p * mesh / z_s,
        planet_fault=2.0 * mesh / z_p,
        ring_fault=n_p * mesh / z_r,
    )
    if np.ndim(mesh) == 0:
        out = PlanetaryFrequencies(*(float(getattr(out, f.name)) for f in fields(out)))
    return out
