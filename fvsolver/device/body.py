"""The body of a whole device: its pool, the pool's contact with the glass, and the centre of
mass that tips the device.

Simplifications (ours, stated so a user can judge them):

* The pool is well mixed: one temperature T_p, its vapour saturated, p_body = p_sat(T_p).
* The pool's level stays where the fill put it: the column (a few cm of a 4 mm bore, ~1 % of
  the pool) is not taken off the level when the wetted area is decided.
* The liquid column in the tube is at the pool's temperature and exchanges no heat with the
  tube; the bore is insulated.  Its height follows the pressure difference quasi-statically,
  h = (p_body - p_head) / (rho_l(T_p) g), so its mass and enthalpy stay in the pool's books.
* The device tips when its centre of mass rises to the pivot; tilt, swinging and the liquid's
  slosh are not modelled.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from fvsolver.device.spec import GRAVITY
from fvsolver.errors import CaseError
from fvsolver.mesh.device import DeviceLayout, spherical_cap_centroid, spherical_cap_volume


def wetted_fractions(mesh, level_z: float) -> np.ndarray:
    """The fraction of each boundary face below the pool's level (n_boundary,).

    A face's area is taken as linear in height between its two nodes, which is exact for a
    zone of a sphere (Archimedes) or of a cylinder and second order for the straight faces
    that stand in for them; a face at one height counts as wetted when it lies below the level.
    So the wetted area follows the level smoothly as the mesh is refined instead of jumping a
    whole face at a time.
    """
    z = mesh.nodes[mesh.boundary_nodes, 1]
    lo, hi = z.min(axis=1), z.max(axis=1)
    span = hi - lo
    flat = span <= 1e-12 * max(float(np.abs(z).max()), 1.0)
    frac = np.clip((level_z - lo) / np.where(flat, 1.0, span), 0.0, 1.0)
    return np.where(flat, (lo < level_z).astype(float), frac)


@dataclass(frozen=True)
class PoolContact:
    """The body's inner glass: the pool below its level, the body's saturated vapour above.

    .. math:: q = h\\,(T_p - T_s), \\quad h = f\\,h_{liquid} + (1 - f)\\,h_{vapour}

    with f the face's wetted fraction (:func:`wetted_fractions`; without them, whether its
    centre lies below the level).  ``context["pool"]["temperature"]`` supplies T_p (K).
    """

    level_z: float
    liquid_coefficient: float
    vapour_coefficient: float
    wetted: np.ndarray | None = field(default=None, compare=False, hash=False, repr=False)
    coupled = True

    def validate(self, where: str) -> None:
        return None

    def coefficient(self, centres: np.ndarray, faces: np.ndarray | None = None) -> np.ndarray:
        """h (W/(m2 K)) of boundary faces ``faces`` with centres ``centres`` (n, 2)."""
        if self.wetted is not None and faces is not None:
            f = self.wetted[faces]
        else:
            f = (centres[:, 1] < self.level_z).astype(float)
        return f * self.liquid_coefficient + (1.0 - f) * self.vapour_coefficient

    def heat_flux(self, T_s, time, centres, faces, context):
        h = self.coefficient(centres, faces)
        return h * (context["pool"]["temperature"] - T_s), -h

    surface_kind = 0  # fvsolver.kernels.surfaces.DRY: convection to the pool's temperature

    def surface_parameters(self, faces, centres, context) -> np.ndarray:
        """The compiled solve's parameter rows (``fvsolver.kernels.surfaces``): h and T_p."""
        from fvsolver.kernels.surfaces import PARAMETERS

        p = np.zeros((len(faces), PARAMETERS))
        p[:, 0], p[:, 1] = self.coefficient(centres, faces), context["pool"]["temperature"]
        return p

    def update_surface_parameters(self, rows, faces, context) -> None:
        """Rewrite, in place, the column of ``surface_parameters``' rows that the context sets."""
        rows[:, 1] = context["pool"]["temperature"]


@dataclass(frozen=True)
class PoolGeometry:
    """Where the pool sits in the body: its level and its centre of mass (m, mesh frame).

    The liquid fills the body's inner sphere from the bottom up, less the dip tube's glass
    (outer radius b) below the level, which it surrounds.
    """

    level_z: float
    centroid_z: float
    volume: float

    @classmethod
    def from_fill(cls, layout: DeviceLayout, volume: float, where: str = "pool.fill_volume") -> "PoolGeometry":
        rbi, b = layout.body_inner_radius, layout.tube_outer_radius
        bottom = layout.body_centre_z - rbi
        tube_end_height = layout.tube_end_z - bottom

        def liquid(height: float) -> float:  # volume below the level at ``height`` above the inner bottom
            tube = math.pi * b * b * max(height - tube_end_height, 0.0)
            return spherical_cap_volume(rbi, height) - tube

        top = 2.0 * rbi - (rbi - math.sqrt(rbi * rbi - b * b))  # where the tube leaves the body
        if not tube_end_height < top or not liquid(tube_end_height) < volume < liquid(top):
            raise CaseError(
                f"{where}: got {volume!r} m3, expected more than {liquid(tube_end_height):.4g} m3 (the dip tube's "
                f"end must stand in the liquid) and less than {liquid(top):.4g} m3 (the body's volume below its "
                "top); change the fill")
        from scipy.optimize import brentq  # here: a head-only case never imports scipy.optimize

        height = brentq(lambda x: liquid(x) - volume, 0.0, top, xtol=1e-14)
        cap_v = spherical_cap_volume(rbi, height)
        moment = cap_v * (bottom + spherical_cap_centroid(rbi, height))
        immersed = max(height - tube_end_height, 0.0)
        moment -= math.pi * b * b * immersed * (layout.tube_end_z + 0.5 * immersed)
        return cls(bottom + height, moment / volume, volume)


@dataclass(frozen=True)
class TipModel:
    """The centre of mass of the device and the column height that brings it to the pivot.

    Parameters
    ----------
    fixed_mass : kg, the glass of both bulbs and the tube, the cap's fibres, added parts
    fixed_moment : kg m, their first moment about z = 0
    bore_area : m2, the tube's bore (pi a^2)
    bore_top_z : m, where the bore opens into the head
    pool_centroid_z, pool_level_z : m
    pivot_z : m or None (None: ``column_height`` is given)
    column_height : m or None
    cap_z : m, the cap water's centre (the cap's volume centroid)
    """

    fixed_mass: float
    fixed_moment: float
    bore_area: float
    bore_top_z: float
    pool_centroid_z: float
    pool_level_z: float
    cap_z: float
    pivot_z: float | None
    column_height: float | None

    def centre_of_mass(self, pool_mass: float, column_height: float, column_density: float, cap_water: float,
                       condensate_mass: float, condensate_moment: float) -> float:
        """z of the centre of mass (m): the fixed parts, the cap's water, the pool less the column
        it feeds, the column from the pool's level up, the condensate on the head's wall."""
        column = column_density * self.bore_area * column_height
        mass = self.fixed_mass + cap_water + pool_mass + condensate_mass
        moment = (self.fixed_moment + cap_water * self.cap_z + (pool_mass - column) * self.pool_centroid_z
                  + column * (self.pool_level_z + 0.5 * column_height) + condensate_moment)
        return moment / mass

    @property
    def max_column(self) -> float:
        """The tallest column the tube holds: from the pool's level to the head (m)."""
        return self.bore_top_z - self.pool_level_z

    def tip_column(self, pool_mass: float, column_density: float, cap_water: float, condensate_mass: float,
                   condensate_moment: float) -> float:
        """Column height (m) that puts the centre of mass at the pivot (inf: never in the tube).

        With the column's mass rho A h standing from the level z_l, the moment about the pivot is
        S0 + rho A h (z_l - z_pool + h / 2) = M z_pivot: a quadratic in h.
        """
        if self.column_height is not None:
            return self.column_height
        mass = self.fixed_mass + cap_water + pool_mass + condensate_mass
        s0 = self.fixed_moment + cap_water * self.cap_z + pool_mass * self.pool_centroid_z + condensate_moment
        k = column_density * self.bore_area
        # k/2 h^2 + k (z_l - z_pool) h - (M z_pivot - S0) = 0; the column's mass does not change M
        c = mass * self.pivot_z - s0
        if c <= 0.0:
            return 0.0
        d = self.pool_level_z - self.pool_centroid_z
        return (-d + math.sqrt(d * d + 2.0 * c / k))

    def tip_pressure(self, height: float, column_density: float) -> float:
        """rho_l g h, Pa."""
        return column_density * GRAVITY * height
