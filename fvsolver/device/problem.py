r"""The device head coupled to its lumped states, advanced together in one implicit step.

State vector y = [T (n_cells) | m_v | c (n_inner) | W | T_b]:

* T: cell temperatures of glass and cap, K;
* m_v: working-fluid vapour mass in the head's vapour space, kg, as its change from the fill;
* c: condensate inventory of each inner-wall face, kg/m2;
* W: water held by the cap, kg (constant when a reservoir keeps it wet);
* T_b: temperature of the second bulb, K (constant when it follows the room); in a whole device,
  the pool's temperature;
* m_p (whole device only): the pool's mass, kg.

Conserved totals: the head's energy, the working fluid (m_v + sum A c, closed; + m_p in a whole
device), the cap water, and the second bulb's (the pool's) energy.

A whole device's body glass is meshed with the head: the pool exchanges heat with its inner
glass (:class:`fvsolver.device.body.PoolContact`), its vapour is at p_sat(T_p), and while the
device is tipped (``tipped``) the two vapour spaces are joined: vapour flows from the pool into
the head at

.. math:: G = \frac{V M}{R T_0 \tau}\,(p_{sat}(T_p) - p_v),

which brings the head to the body's pressure within a few equalisation times tau; the pool pays
the vapour's enthalpy G (c_l (T_p - T_ref) + L(T_p)).
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np

from fvsolver.boundary import PatchCondition
from fvsolver.conduction import ConductionProblem, Evaluation
from fvsolver.device.body import PoolContact, wetted_fractions
from fvsolver.device.spec import GRAVITY, DeviceSpec
from fvsolver.materials import REFERENCE_TEMPERATURE
from fvsolver.device.surfaces import CondensingWall, EvaporativeCap, RoomSurface, water_latent_heat
from fvsolver.device.transfer import SphereTransfer
from fvsolver.kernels import device as _kd
from fvsolver.kernels import surfaces as ks
from fvsolver.linear import KeptTriplets, LowRankUpdate
from fvsolver.properties import moist_air, porous
from fvsolver.properties.fluids import UNIVERSAL_GAS_CONSTANT

CAP_PATCHES = ("cap_outer", "cap_edge")
ROOM_PATCHES = ("glass_outer", "neck_outer")
BODY_ROOM_PATCHES = ("body_outer",)
POOL_PATCHES = ("body_inner", "dip_tube_outer", "tube_end")
# the surface temperatures' clipping intervals of the correlations, K (iterates may stray)
T_SURFACE_LOW, T_SURFACE_HIGH, T_BODY_HIGH = 274.0, 320.0, 390.0


@dataclass
class DeviceEvaluation:
    """Rates of every unknown and the pieces the Jacobian and the diagnostics need."""

    rate: np.ndarray
    conduction: Evaluation
    context: dict
    condensation: np.ndarray      # kg/(m2 s) on the inner faces (negative: evaporation)
    evaporation: np.ndarray       # kg/(m2 s) on the cap faces
    sensible: np.ndarray          # W into each cell from the water's sensible enthalpy
    extras: dict = field(default_factory=dict)
    # what the totals' inflows and gross exchanges are summed from, when first asked for (the
    # stepper asks only at the iterates whose balance it checks): the mass flows A j into the
    # inner faces, kg/s, the total evaporation, kg/s, and the second bulb's loss conductance, W/K
    wall_flow: np.ndarray | None = None
    evaporation_total: float = 0.0
    loss_conductance: float = 0.0

    @cached_property
    def inflows(self) -> dict:
        rate, tb = self.rate, self.extras["i_tb"]
        return {"energy": self.conduction.heat_in + float(self.sensible.sum()), "working_fluid": 0.0,
                "cap_water": float(rate[self.extras["i_w"]]), "second_bulb_energy": float(rate[tb]),
                "pool_energy": float(rate[tb])}

    @cached_property
    def grosses(self) -> dict:
        x = self.extras
        return {"energy": self.conduction.gross_heat + float(np.abs(self.sensible).sum()),
                "working_fluid": float(np.abs(self.wall_flow).sum()) + abs(x.get("joint_flow", 0.0)) + 1e-300,
                "cap_water": abs(self.evaporation_total) + 1e-300,
                "second_bulb_energy": abs(float(self.rate[x["i_tb"]])) + self.loss_conductance + 1e-300,
                "pool_energy": x.get("pool_gross", 0.0) + 1e-300}

    def inflow(self, group: str) -> float:
        return self.inflows[group]

    def gross(self, group: str) -> float:
        return self.grosses[group]

    @property
    def heat_in(self) -> float:
        return self.inflows["energy"]

    @property
    def surface_temperature(self) -> np.ndarray:
        return self.conduction.surface_temperature

    @property
    def boundary_heat(self) -> np.ndarray:
        return self.conduction.boundary_heat

    @property
    def boundary_jacobian(self) -> np.ndarray:  # pragma: no cover - only affine problems use it
        raise AttributeError("the device problem is never affine")


class DeviceProblem:
    """Glass and wet cap, vapour space, condensation sink, cap water and second bulb."""

    exact_jacobian = False
    constant_jacobian = False
    linear = False
    # Newton starts each step from the extrapolated state (inventories projected to >= 0)
    newton_from_predictor = True

    def __init__(self, mesh, materials: dict, conditions: list[PatchCondition], spec: DeviceSpec,
                 sources: tuple = ()):
        self.mesh, self.spec = mesh, spec
        room = spec.room
        self.cap_term = EvaporativeCap(room.air_temperature, room.vapour_density, room.emissivity,
                                       room.surroundings_temperature)
        self.wall_term = CondensingWall(spec.vapour.fluid, spec.vapour.accommodation,
                                        spec.vapour.kinetic_multiplier)
        coupled = {p: (replace(self.cap_term, extra_flux=room.extra_flux.get(p, 0.0)),)
                   for p in CAP_PATCHES if p in mesh.patch_names}
        coupled.update({p: (self.wall_term,) for p in spec.vapour.patches})
        given = {c.patch: c for c in conditions}
        body = spec.body
        hot = {patch: (t_air, speed) for patch, t_air, speed in (body.hot_air if body is not None else ())}
        for p in ROOM_PATCHES + BODY_ROOM_PATCHES:
            if p in mesh.patch_names and p not in given:
                flux = spec.room.extra_flux.get(p, 0.0)
                if p in hot:  # a warm air stream replaces the room's air on this patch
                    coupled[p] = (RoomSurface(hot[p][0], room.emissivity, room.surroundings_temperature, flux,
                                              "hot_air:" + p),)
                    continue
                exchange = "body" if p in BODY_ROOM_PATCHES else "room"
                coupled[p] = (RoomSurface(room.air_temperature, room.emissivity, room.surroundings_temperature,
                                          flux, exchange),)
        self.tipped = False  # a whole device's vapour spaces are joined while it is tipped
        self._context_cache = None
        self._pressures_kept = None  # (state, vapour reference, pressures) of the last pressures()
        if body is not None:
            contact = self.pool_contact = PoolContact(body.pool.level_z, body.liquid_coefficient,
                                                      body.vapour_coefficient, wetted_fractions(mesh, body.pool.level_z))
            coupled.update({p: (contact,) for p in POOL_PATCHES if p in mesh.patch_names})
            if "bore" not in coupled and "bore" in mesh.patch_names:
                coupled["bore"] = ()  # the column stands in it at the pool's temperature: insulated
        all_conditions = [c for c in conditions if c.patch not in coupled]
        all_conditions += [PatchCondition(p, terms) for p, terms in coupled.items()]
        self.conduction = ConductionProblem(mesh, materials, all_conditions, sources)

        n = mesh.n_cells
        self.n_cells = n
        self.inner = np.concatenate([mesh.patch_faces(p) for p in spec.vapour.patches] + [np.zeros(0, dtype=np.int64)])
        self.cap_faces = np.concatenate([mesh.patch_faces(p) for p in CAP_PATCHES if p in mesh.patch_names])
        self.room_faces = np.concatenate([mesh.patch_faces(p) for p in ROOM_PATCHES if p in mesh.patch_names])
        self.outer_faces = np.concatenate([self.cap_faces, self.room_faces])
        # the room faces whose coefficient is the head's h (a warm air stream's is not)
        self.head_room_faces = np.concatenate(
            [mesh.patch_faces(p) for p in ROOM_PATCHES if p in mesh.patch_names and p not in given and p not in hot]
            + [np.zeros(0, dtype=np.int64)])
        n_in = len(self.inner)
        self.i_mv, self.i_c = n, np.arange(n + 1, n + 1 + n_in)
        self.i_w, self.i_tb = n + 1 + n_in, n + 2 + n_in
        self._inventories = slice(n + 1, n + 1 + n_in)
        self.n = n + n_in + 3
        self.body = body
        self.i_mp = None
        if body is not None:
            self.i_mp = self.n
            self.n += 1
            self.pool_faces = np.concatenate([mesh.patch_faces(p) for p in POOL_PATCHES if p in mesh.patch_names])
            self.body_faces = np.concatenate([mesh.patch_faces(p) for p in BODY_ROOM_PATCHES])
            contact = mesh.boundary_areas[self.pool_faces] * self.pool_contact.coefficient(
                mesh.boundary_centres[self.pool_faces], self.pool_faces)
            self.pool_conductance = float(contact.sum())  # W/K
            # the joined vapour spaces' conductance, kg/(s Pa)
            self.joint_conductance = (spec.vapour.volume * spec.vapour.fluid.molar_mass
                                      / (UNIVERSAL_GAS_CONSTANT * spec.vapour.initial_temperature
                                         * body.equalisation_time))
        self.cap_cells = mesh.material_cells("cap")
        self.cap_material = materials["cap"]
        self.cap_volume = float(mesh.cell_volumes[self.cap_cells].sum())
        self.pore_water_capacity = (self.cap_material.porosity * self.cap_volume
                                    * self.cap_material.water_volumetric_heat / spec.cap_water.water_heat_capacity)
        # the water's sensible enthalpy's fixed factors (_water_sensible)
        self._charge = spec.cap_water.mode == "charge"
        self._cap_area = mesh.boundary_areas[self.cap_faces]
        self._cap_cell_volumes = mesh.cell_volumes[self.cap_cells]
        self._reservoir_share = self._cap_cell_volumes / self.cap_volume * spec.cap_water.water_heat_capacity
        self._sensible_slope = self._cap_cell_volumes * self.cap_material.porosity * (
            self.cap_material.water_volumetric_heat - 1.2 * 1006.0)
        # the cells' and inventories' rates in one compiled call (kernels.device) where numba's JIT is
        # on; its twin is the NumPy of _rates and _water_sensible
        self._compiled_rates = _kernels_compiled()
        self._energy_slope = getattr(self.cap_material, "energy_slope", 0.0)
        self.inner_area = mesh.boundary_areas[self.inner]
        self.outer_diameter = spec.room.diameter
        self._keep_means(mesh)
        # the outside coefficients: the correlations' inputs are checked here, once, over the surface
        # temperatures' clipping intervals (see fvsolver.device.transfer); the evaluations clip
        self.head_transfer = SphereTransfer(room.diameter, room.air_temperature, room.pressure, room.air_speed,
                                            room.convection, T_SURFACE_LOW, T_SURFACE_HIGH,
                                            room.heat_transfer_coefficient or 0.0, room.lewis_number)
        cw = spec.cap_water
        porous.drying_rate_factor(1.0, cw.critical_saturation, cw.residual_saturation)  # refuses bad pairs now
        self._wet_slope = (cw.residual_saturation, cw.critical_saturation - cw.residual_saturation)
        if body is not None:
            self.body_transfer = SphereTransfer(body.diameter, room.air_temperature, room.pressure, room.air_speed,
                                                room.convection, T_SURFACE_LOW, T_SURFACE_HIGH,
                                                room.heat_transfer_coefficient or 0.0, mass_transfer=False)
            self.hot_transfer = tuple(("hot_air:" + patch, SphereTransfer(body.diameter, t_air, room.pressure, speed,
                                                                          "forced", T_SURFACE_LOW, T_BODY_HIGH,
                                                                          mass_transfer=False))
                                      for patch, t_air, speed in body.hot_air)
        self.vapour_reference = spec.vapour.vapour_mass(spec.vapour.initial_temperature)
        self.tolerance_scale = self._tolerance_scale()
        # the Jacobian's kept assembly (three low-rank columns) and its constant pieces
        self._triplets = KeptTriplets(self.n, 3)
        self._block_ends = None  # where each block of the recorded pattern ends in its values
        self._wall_work = np.empty((2, len(self.inner)))
        self._conduction_pattern = (None, None)
        self._cells = np.arange(n)
        self._wall_weight = self.inner_area / max(float(self.inner_area.sum()), 1e-300)
        area_o = mesh.boundary_areas[self.outer_faces]
        self._outer_weight = area_o / area_o.sum() if area_o.size else area_o
        # the outside faces' groups of the transfer coupling: (faces, their cells, their areas, cap or not)
        self._cap_face_cells = mesh.boundary_cell[self.cap_faces]
        self._cap_work = np.empty(len(self.cap_faces))
        self._transfer_groups = tuple((faces, mesh.boundary_cell[faces], mesh.boundary_areas[faces], cap)
                                      for faces, cap in ((self.cap_faces, True), (self.head_room_faces, False))
                                      if faces.size)
        self._lumped_rows = np.array([self.i_mv, self.i_w, self.i_tb] + ([self.i_mp] if body is not None else []))
        if body is not None:
            self._pool_rows = np.array([self.i_mv, self.i_mp, self.i_tb])

    # -- state ----------------------------------------------------------------------------------
    def initial_state(self, temperature: float) -> np.ndarray:
        s = self.spec
        y = np.empty(self.n)
        y[: self.n_cells] = temperature
        # the vapour mass is carried as its change from the initial fill, so that its round-off
        # (and so the working-fluid balance) is set by the change, not by the whole fill
        self.vapour_reference = s.vapour.vapour_mass(temperature)
        y[self.i_mv] = 0.0
        y[self.i_c] = s.vapour.initial_film
        y[self.i_w] = s.cap_water.initial_saturation * self.pore_water_capacity
        y[self.i_tb] = s.second_bulb.initial_temperature
        if self.body is not None:
            y[self.i_tb] = self.body.initial_temperature
            y[self.i_mp] = self.body.initial_pool_mass
        return y

    def _tolerance_scale(self) -> np.ndarray:
        scale = np.ones(self.n)
        m0 = self.spec.vapour.vapour_mass(self.spec.room.air_temperature)
        # a quarter kelvin's worth of saturated vapour, about 1 % of the fill: the column's pressure
        # difference follows m_v, and at tolerance 0.02 this allows about 1 mm of a 50 mm column a
        # step (a kelvin's worth allowed 4 mm, and a tip located inside a long step landed up to 1.4 %
        # off its column)
        scale[self.i_mv] = 0.01 * m0
        scale[self.i_c] = max(self.spec.vapour.initial_film, 1e-2)  # inventories do not steer the steps
        scale[self.i_w] = 0.01 * max(self.pore_water_capacity, 1e-9)
        if self.body is not None:
            scale[self.i_mp] = 1e-3 * self.body.initial_pool_mass
        return scale

    def project(self, y: np.ndarray) -> None:
        """Put a Newton iterate back into the unknowns' domain, in place: no inventory below zero.
        (On a drying face the step's equation c + a phi(c) = c_old is concave in c: Newton's
        iterates from below zero then climb to the root without overshooting it.)"""
        c = y[self._inventories]  # a view: clipped in place
        np.maximum(c, 0.0, out=c)

    def jacobian_changes_fast(self, y: np.ndarray) -> bool:
        """True while an inner face is drying through its limiter's range (c_ref / 100 < c < 100
        c_ref): its inventory row's Jacobian then changes by large factors between iterates, and
        Newton needs it afresh every iteration."""
        cr = self.wall_term.film_reference
        c = y[self._inventories]
        return bool(((c > 1e-2 * cr) & (c < 1e2 * cr)).any())

    @property
    def nonnegative(self) -> np.ndarray:
        """Unknowns that never go below zero (their content is a positive multiple of them)."""
        return self.i_c

    def vapour_mass(self, y: np.ndarray) -> float:
        """Working-fluid vapour in the head, kg."""
        return self.vapour_reference + float(y[self.i_mv])

    def saturation(self, W: float) -> float:
        return W / self.pore_water_capacity

    def vapour_temperature(self, T: np.ndarray) -> float:
        """Area-weighted mean temperature of the cells along the vapour space's walls."""
        if self.inner.size == 0:  # no condensing wall: the vapour keeps its initial temperature
            return self.spec.vapour.initial_temperature
        return float(T[self._inner_cells] @ self._inner_weights)

    def pressures(self, y: np.ndarray) -> dict:
        """Head and second-bulb pressures (Pa) and their difference. (The last state's are kept:
        after a step the cycle, the monitor and the history ask for the same state's several times.)"""
        kept = self._pressures_kept
        if (kept is not None and kept[1] == self.vapour_reference and kept[0].shape == y.shape
                and (kept[0] == y).all()):
            return dict(kept[2])
        out = self._pressures(y)
        self._pressures_kept = (np.array(y, dtype=float), self.vapour_reference, out)
        return dict(out)

    def _pressures(self, y: np.ndarray) -> dict:
        T = y[: self.n_cells]
        t_v = self.vapour_temperature(T)
        vap = self.spec.vapour
        p_v = self.vapour_mass(y) * UNIVERSAL_GAS_CONSTANT * t_v / (vap.fluid.molar_mass * vap.volume)
        p_head = p_v + vap.non_condensable_pressure(t_v)
        t_b = y[self.i_tb]
        p_bulb = float(vap.fluid.saturation_pressure(t_b)) + vap.non_condensable_pressure(t_b)
        return {"head_vapour_pa": p_v, "head_pa": p_head, "second_bulb_pa": p_bulb,
                "pressure_drop_pa": p_bulb - p_head, "vapour_temperature_k": t_v}

    def column(self, y: np.ndarray) -> dict:
        """A whole device's liquid column: the height the pressure difference holds (m, quasi-static),
        the height at which the device tips (m) and the liquid's density (kg/m3)."""
        fluid, tip = self.spec.vapour.fluid, self.spec.cycle.tip
        rho = float(fluid.liquid_density(y[self.i_tb]))
        condensate = self.inner_area * y[self.i_c]
        z = self.mesh.boundary_centres[self.inner, 1]
        tip_height = tip.tip_column(float(y[self.i_mp]), rho, float(y[self.i_w]), float(condensate.sum()),
                                    float(np.dot(condensate, z)))
        height = max(self.pressures(y)["pressure_drop_pa"], 0.0) / (rho * GRAVITY)
        return {"height_m": height, "tip_height_m": tip_height, "density": rho}

    def tip_pressure_drop(self, y: np.ndarray) -> float:
        """The pressure difference (Pa) that tips a whole device now."""
        c = self.column(y)
        return self.spec.cycle.tip.tip_pressure(c["tip_height_m"], c["density"])

    def context(self, y: np.ndarray) -> dict:
        """The lumped state as the coupled surfaces see it (the last one is kept: capacity and
        evaluate ask for the same state in turn)."""
        cached = self._context_cache
        if cached is not None and cached[1] == self.tipped and cached[0].shape == y.shape and (cached[0] == y).all():
            return cached[2]
        ctx = self._context(y)
        self._context_cache = (y.copy(), self.tipped, ctx)
        return ctx

    def _keep_means(self, mesh) -> None:
        """The area-weighted means' cells and weights (each mean is one dot product)."""
        def kept(faces):
            area = mesh.boundary_areas[faces]
            total = area.sum()
            return mesh.boundary_cell[faces], (area / total if total > 0.0 else area)
        self._inner_cells, self._inner_weights = kept(self.inner)
        self._outer_cells_of_faces, self._outer_weights = kept(self.outer_faces)
        if self.spec.body is not None:
            self._body_cells, self._body_weights = kept(np.concatenate(
                [mesh.patch_faces(p) for p in BODY_ROOM_PATCHES]))

    def _context(self, y: np.ndarray) -> dict:
        n = self.n_cells
        T = y[:n]
        s = self.saturation(float(y[self.i_w]))
        # porous.drying_rate_factor of the saturation clipped to [0, 1], on one number (its
        # saturations were checked at set-up)
        s_r, width = self._wet_slope
        clipped = min(max(s, 0.0), 1.0)
        if clipped != clipped:  # NaN: the checked function refuses it with its message
            porous.drying_rate_factor(clipped, s_r + width, s_r)
        wet = min(max((clipped - s_r) / width, 0.0), 1.0)
        t_mean = float(T[self._outer_cells_of_faces] @ self._outer_weights)
        transfer = self.head_transfer
        h, h_m = transfer.coefficients(transfer.clip(t_mean))
        inventory = np.zeros(self.mesh.n_boundary)
        inventory[self.inner] = y[self._inventories]
        # the head's vapour pressure and temperature, as pressures() gives them
        t_v = self.vapour_temperature(T)
        vap = self.spec.vapour
        p_v = self.vapour_mass(y) * UNIVERSAL_GAS_CONSTANT * t_v / (vap.fluid.molar_mass * vap.volume)
        ctx = {"cap": {"h": h, "h_m": h_m, "wet_fraction": wet, "saturation": s, "surface_mean": t_mean},
               "room": {"h": h},
               "vapour": {"pressure": p_v, "temperature": t_v, "inventory": inventory}}
        if self.body is not None:
            ctx.update(self._body_context(T, y))
        return ctx

    def _transfer_coefficients(self, t_surf: float) -> tuple[float, float]:
        """The head's outside convection coefficient h (W/(m2 K)) and the cap's mass-transfer
        coefficient h_m (m/s) at the outer surface's mean temperature t_surf (K), clipped into the
        correlations' range."""
        transfer = self.head_transfer
        return transfer.coefficients(transfer.clip(t_surf))

    def _transfer_derivatives(self, t_mean: float, h: float, h_m: float) -> tuple[float, float]:
        """dh/dt_surf and dh_m/dt_surf at the context's t_mean (a central difference of the compiled
        coefficients, SphereTransfer.derivatives; zero where t_surf is clipped)."""
        if not T_SURFACE_LOW < t_mean < T_SURFACE_HIGH - 0.01:
            return 0.0, 0.0
        return self.head_transfer.derivatives(t_mean)

    def _body_context(self, T: np.ndarray, y: np.ndarray) -> dict:
        """The pool's temperature and the body bulb's outside coefficients (room, warm air streams)."""
        t_surf = float(T[self._body_cells] @ self._body_weights)
        t_surf = min(max(t_surf, T_SURFACE_LOW), T_BODY_HIGH)  # the correlations' range; iterates may stray
        h = self.body_transfer.h(min(t_surf, T_SURFACE_HIGH))
        out = {"pool": {"temperature": float(y[self.i_tb])}, "body": {"h": h}}
        for key, transfer in self.hot_transfer:
            out[key] = {"h": transfer.h(t_surf)}
        return out

    # -- the stepper's interface -------------------------------------------------------------------
    def balance_groups(self) -> dict:
        """Conserved totals; the cap water and the second bulb count only when they can change."""
        groups = {"energy": slice(0, self.n_cells), "working_fluid": slice(self.i_mv, self.i_w)}
        if self.body is not None:
            return {"energy": groups["energy"], "working_fluid": np.r_[self.i_mv:self.i_w, self.i_mp],
                    "cap_water": slice(self.i_w, self.i_w + 1), "pool_energy": slice(self.i_tb, self.i_tb + 1)}
        if self.spec.cap_water.mode == "charge":
            groups["cap_water"] = slice(self.i_w, self.i_w + 1)
        if self.spec.second_bulb.mode == "lumped":
            groups["second_bulb_energy"] = slice(self.i_tb, self.i_tb + 1)
        return groups

    def capacity(self, y: np.ndarray):
        n = self.n_cells
        ctx = self.context(y)
        m = np.empty(self.n)
        dm = np.empty(self.n)
        m[:n], dm[:n] = self.conduction.capacity(y[:n], ctx)
        m[self.i_mv], dm[self.i_mv] = y[self.i_mv], 1.0
        c = self._inventories  # (a slice: i_c are consecutive)
        m[c], dm[c] = self.inner_area * y[c], self.inner_area
        m[self.i_w], dm[self.i_w] = y[self.i_w], 1.0
        if self.body is not None:  # the pool's energy, m_p c_l (T_p - T_ref)
            cl = self.body.liquid_heat_capacity
            m[self.i_tb], dm[self.i_tb] = y[self.i_mp] * cl * (y[self.i_tb] - REFERENCE_TEMPERATURE), y[self.i_mp] * cl
            m[self.i_mp], dm[self.i_mp] = y[self.i_mp], 1.0
            return m, dm
        cb = self.spec.second_bulb.heat_capacity
        m[self.i_tb], dm[self.i_tb] = cb * y[self.i_tb], cb
        return m, dm

    def _rates(self, T, conduction_rate, evaporation_total, j, rate):
        """The water's sensible enthalpy (``_water_sensible``), the cells' rates into ``rate`` and the
        inner faces' mass flows A j, written into ``rate``'s inventory rows: (sensible, its T_P
        derivative, A j); one compiled call (``kernels.device.device_rates``) where numba is on."""
        n = self.n_cells
        if not self._compiled_rates:
            sensible, dsensible = self._water_sensible(T, evaporation_total)
            rate[:n] = conduction_rate + sensible
            aj = self.inner_area * j
            rate[self.i_c] = aj
            return sensible, dsensible, aj
        sensible, dsensible, per_evaporation = np.empty(n), np.empty(n), np.empty(n)
        aj = np.empty(self.inner_area.size)
        _kd.device_rates(T, conduction_rate, self.cap_cells, self._cap_cell_volumes, self._charge, evaporation_total,
                         self.pore_water_capacity, self._energy_slope, self._sensible_slope, self._reservoir_share,
                         self.spec.cap_water.reservoir_temperature, REFERENCE_TEMPERATURE, self.inner_area, j,
                         self.i_mv + 1, rate, sensible, dsensible, per_evaporation, aj)
        self._per_evaporation = per_evaporation
        return sensible, dsensible, aj

    def _water_sensible(self, T, evaporation_total):
        """W into each cap cell from the sensible enthalpy of the water leaving or arriving."""
        out = np.zeros(self.n_cells)
        dout = np.zeros(self.n_cells)
        per_evaporation = np.zeros(self.n_cells)  # d out / d(evaporation_total)
        cells = self.cap_cells
        v, t_cap = self._cap_cell_volumes, T[cells]
        if self._charge:
            # water leaving cell P takes its share of the stored sensible energy with it
            ds_dt = -evaporation_total / self.pore_water_capacity
            de_ds = self.cap_material.denergy_dsaturation(t_cap)
            out[cells] = v * de_ds * ds_dt
            dout[cells] = self._sensible_slope * ds_dt
            per_evaporation[cells] = -v * de_ds / self.pore_water_capacity
        else:
            # the reservoir replaces what evaporates, with water at its own temperature
            per_cell = self._reservoir_share * (self.spec.cap_water.reservoir_temperature - t_cap)
            per_evaporation[cells] = per_cell
            out[cells] = evaporation_total * per_cell
            dout[cells] = -evaporation_total * self._reservoir_share
        self._per_evaporation = per_evaporation
        return out, dout

    def evaluate(self, y: np.ndarray, time: float) -> DeviceEvaluation:
        n, mesh = self.n_cells, self.mesh
        T = y[:n]
        ctx = self.context(y)
        ev = self.conduction.evaluate(T, time, ctx)
        t_s = ev.surface_temperature
        terms = ev.surface_terms
        if terms is not None:  # the compiled surface solve's mass fluxes at its surface temperatures
            wall, cap = terms[self.inner], terms[self.cap_faces]
            j, dj_dt, dj_dp, dj_dc = wall[:, ks.M], wall[:, ks.DM], wall[:, ks.DM_DP], wall[:, ks.DM_DC]
            m_e, dme_dt = cap[:, ks.M], cap[:, ks.DM]
        else:
            j, dj_dt, dj_dp, dj_dc = self.wall_term.mass_flux(t_s[self.inner], self.inner, ctx)
            m_e, dme_dt = self.cap_term.mass_flux(t_s[self.cap_faces], ctx)
        evap_total = float(np.dot(self._cap_area, m_e))
        rate = np.zeros(self.n)
        sensible, dsensible, aj = self._rates(T, ev.rate, evap_total, j, rate)
        rate[self.i_mv] = -aj.sum()
        if self._charge:
            rate[self.i_w] = -evap_total
        bulb = self.spec.second_bulb
        extras = {}
        if self.body is not None:
            extras = self._pool_rates(y, ev, rate)
        elif bulb.mode == "lumped":
            rate[self.i_tb] = bulb.loss_conductance * (self.spec.room.air_temperature - y[self.i_tb]) + bulb.heater_power
        return DeviceEvaluation(rate, ev, ctx, j, m_e, sensible,
                                {"dj_dt": dj_dt, "dj_dp": dj_dp, "dj_dc": dj_dc, "dme_dt": dme_dt,
                                 "dsensible": dsensible, "sensible_per_evaporation": self._per_evaporation,
                                 "T": T, "i_w": self.i_w, "i_tb": self.i_tb, **extras},
                                aj, evap_total, bulb.loss_conductance)

    def joint_flow(self, y: np.ndarray) -> tuple[float, float, float]:
        """Vapour flow from the pool into the head while tipped (kg/s) and its derivatives with
        respect to m_v and T_p (zero while standing)."""
        if not self.tipped:
            return 0.0, 0.0, 0.0
        fluid, k = self.spec.vapour.fluid, self.joint_conductance
        t_p = float(y[self.i_tb])
        p = self.pressures(y)
        dp_dm = UNIVERSAL_GAS_CONSTANT * p["vapour_temperature_k"] / (fluid.molar_mass * self.spec.vapour.volume)
        g = k * (float(fluid.saturation_pressure(t_p)) - p["head_vapour_pa"])
        return g, -k * dp_dm, k * float(fluid.dsaturation_pressure_dT(t_p))

    def _pool_rates(self, y: np.ndarray, ev, rate: np.ndarray) -> dict:
        """The pool's rows: heat from its glass, the joined vapour spaces' flow."""
        t_p = float(y[self.i_tb])
        from_glass = -float(ev.boundary_heat[self.pool_faces].sum())
        g, dg_dm, dg_dt = self.joint_flow(y)
        cl = self.body.liquid_heat_capacity
        leaving = cl * (t_p - REFERENCE_TEMPERATURE) + float(self.spec.vapour.fluid.latent_heat(t_p))
        rate[self.i_mv] += g
        rate[self.i_mp] = -g
        rate[self.i_tb] = from_glass - g * leaving
        return {"joint_flow": g, "dg_dm": dg_dm, "dg_dt": dg_dt, "leaving_enthalpy": leaving,
                "pool_heat_from_glass": from_glass,
                # the scale of the pool's exchange cannot vanish: at least what its glass would pass at 1 K
                "pool_gross": float(np.abs(ev.boundary_heat[self.pool_faces]).sum()) + abs(g * leaving)
                + self.pool_conductance}

    def jacobian(self, alpha0: float, dt: float, dm: np.ndarray, ev: DeviceEvaluation) -> LowRankUpdate:
        """J = alpha0 dm/dy - dt dF/dy; the weak dependences (transfer coefficients and the cap's
        conductivity on the state, the deferred non-orthogonal correction) are left out.

        The dense couplings are kept as the update U W^T (three columns: the vapour temperature, the
        total evaporation, the outside coefficients), given as entries of the bordered system
        ``[[A, U], [W^T, -I]]`` (U's column j at column n + j, W's at row n + j). Every entry is
        given at every call, exact zeros included (a standing device's joined-vapour terms, fixed
        outside coefficients), so the pattern is the run's and is assembled once."""
        n, mesh, x = self.n_cells, self.mesh, ev.extras
        c = ev.conduction
        kept = self._triplets
        # the recorded pattern's values written in place, the heavy blocks by kernels.device (its
        # twin: the blocks given to KeptTriplets below, which a first call records)
        fast = self._block_ends is not None and kept.assembly is not None and c.surface_terms is not None
        if fast:
            add = _BlockWriter(kept.assembly.values, self._block_ends)
            self.conduction.jacobian_values(alpha0, dt, dm[:n], c, add.values[: self._block_ends[0]])
            add.skip(1)
        else:
            jtt = self.conduction.jacobian(alpha0, dt, dm[:n], c)
            block = self._conduction_pattern
            if kept.assembly is not None and not (jtt.indices is block[0] or np.array_equal(jtt.indices, block[0])):
                kept.forget()  # the conduction block's pattern changed (never within a run today)
            if kept.assembly is None:
                self._conduction_pattern = (jtt.indices, np.repeat(np.arange(n), np.diff(jtt.indptr)))
            kept.begin()
            add = _Recorder(kept.add) if kept.assembly is None else kept.add
            add(self._conduction_pattern[1], jtt.indices, jtt.data)
        add(self._cells, self._cells, -dt * x["dsensible"])
        # condensing inner faces (the common factors formed once, in the order the products take them)
        vap = self.spec.vapour
        dp_dm = UNIVERSAL_GAS_CONSTANT * ev.context["vapour"]["temperature"] / (vap.fluid.molar_mass * vap.volume)
        p_v, t_v = ev.context["vapour"]["pressure"], ev.context["vapour"]["temperature"]
        per_tv = p_v / t_v  # dp_v / dT_v at fixed m_v (the flux sees T_v through p_v only)
        u = self.n + 0  # the bordered system's column (and row) of the first coupling
        P = self._inner_cells
        if fast:
            sum_dJ_dm = _kd.wall_jacobian(self.inner, c.surface_conductance, c.surface_derivative, c.surface_terms,
                                          self.inner_area, dp_dm, per_tv, alpha0, dt, self._wall_work, add.values,
                                          add.position)
            add.skip(10)
        else:
            sum_dJ_dm = self._wall_jacobian(alpha0, dt, ev, dp_dm, per_tv, add)
        if self.body is not None:
            # the joined vapour spaces' flow G = k (p_sat(T_p) - p_v) sees T_v through p_v too (zero
            # while the device stands)
            dg_dtv = -self.joint_conductance * per_tv if self.tipped else 0.0
            add(self._pool_rows, u, (-dt * dg_dtv, dt * dg_dtv, dt * dg_dtv * x["leaving_enthalpy"]))
        add(u, P, self._wall_weight)
        lumped = np.zeros(self.n - n)
        lumped[0] = alpha0 + dt * sum_dJ_dm
        # the water's sensible enthalpy in every cap cell follows the total evaporation, which
        # follows the temperatures of the cells under the cap's faces: a second
        self._evaporation_coupling(dt, ev, add)
        # the outside coefficients h and h_m follow the outer surface's mean temperature: a third,
        # of every outer face to every outer cell
        self._transfer_coupling(dt, ev, add)
        # the cap's water
        if self.spec.cap_water.mode == "charge":
            bc = self.cap_faces
            Pc = self._cap_face_cells
            kc, gc = c.surface_conductance[bc], c.surface_derivative[bc]
            ac = self._cap_area
            s = float(ev.context["cap"]["saturation"])
            eps = 1e-6
            # porous.drying_rate_factor's central difference, on plain floats as _context takes it (the
            # saturations were checked at set-up, the context refused a NaN)
            s_r, width = self._wet_slope
            s_up, s_down = min(s + eps, 1.0), max(s - eps, 0.0)
            dw_ds = ((min(max((s_up - s_r) / width, 0.0), 1.0) - min(max((s_down - s_r) / width, 0.0), 1.0))
                     / (s_up - s_down))
            dw_dW = dw_ds / self.pore_water_capacity
            wet = max(ev.context["cap"]["wet_fraction"], 1e-12)
            dq_dw = self.cap_term.dheat_flux_dwet(c.surface_temperature[bc], ev.context)
            dts_dW = dq_dw * dw_dW / (kc - gc)
            dme_dw = ev.evaporation / wet
            dME_dT = x["dme_dt"] * kc / (kc - gc)
            dME_dW = dme_dw * dw_dW + x["dme_dt"] * dts_dW
            add(Pc, self.i_w, -dt * ac * kc * dts_dW)
            add(self.i_w, Pc, dt * ac * dME_dT)
            evap_dW = float((ac * dME_dW).sum())
            lumped[self.i_w - n] = alpha0 + dt * evap_dW
            cells = self.cap_cells
            de_dW = self.cap_material.denergy_dsaturation(x["T"][cells]) / self.pore_water_capacity
            add(cells, self.i_w, alpha0 * self._cap_cell_volumes * de_dW)
            # the water's sensible enthalpy follows the total evaporation, which follows W
            add(cells, self.i_w, -dt * x["sensible_per_evaporation"][cells] * evap_dW)
        else:
            lumped[self.i_w - n] = alpha0
        bulb = self.spec.second_bulb
        lumped[self.i_tb - n] = alpha0 * bulb.heat_capacity + (dt * bulb.loss_conductance if bulb.mode == "lumped" else 0.0)
        if self.body is not None:
            self._pool_jacobian(alpha0, dt, dm, ev, lumped, add)
        # the lumped rows' diagonals that add() did not give (m_v, W, T_b, m_p), and the c diagonal above
        add(self._lumped_rows, self._lumped_rows, lumped[self._lumped_rows - n])
        if fast:
            add.finish()
            return kept.assembly()
        if isinstance(add, _Recorder):
            self._block_ends = np.cumsum(add.lengths)
        return kept.matrix()

    def _wall_jacobian(self, alpha0, dt, ev, dp_dm, per_tv, add) -> float:
        """The condensing inner faces' blocks of the Jacobian (``kernels.device.wall_jacobian`` is
        their compiled twin); returns sum(A dJ/dm_v)."""
        c, x = ev.conduction, ev.extras
        b = self.inner
        P = self._inner_cells
        kap, g1 = c.surface_conductance[b], c.surface_derivative[b]
        area = self.inner_area
        den = kap - g1
        tau = kap / den
        terms = c.surface_terms
        lat = terms[b, ks.LATENT] if terms is not None else self.wall_term.latent_heat(c.surface_temperature[b])
        dj_dt, dj_dp, dj_dc = x["dj_dt"], x["dj_dp"], x["dj_dc"]
        lat_dp = lat * dj_dp
        dts_dp = lat_dp / den
        dts_dc = lat * dj_dc / den
        dJ_dT = dj_dt * tau
        dJ_dm = (dj_dp + dj_dt * dts_dp) * dp_dm
        dJ_dc = dj_dc + dj_dt * dts_dc
        dt_area = dt * area
        out_area = -dt_area  # -dt * area, exactly
        out_kap = out_area * kap
        flow_dc = dt_area * dJ_dc
        add(P, self.i_mv, out_kap * dts_dp * dp_dm)
        add(P, self.i_c, out_kap * dts_dc)
        add(self.i_mv, P, dt_area * dJ_dT)
        add(self.i_mv, self.i_c, flow_dc)
        add(self.i_c, P, out_area * dJ_dT)
        add(self.i_c, self.i_mv, out_area * dJ_dm)
        add(self.i_c, self.i_c, alpha0 * area - flow_dc)
        # the vapour temperature (the wall cells' mean) sets p_v = m_v R T_v / V: a rank-one coupling
        # of every wall face to every wall cell, u w^T with w the wall cells' area weights, which
        # fvsolver.linear factorises through the bordered system instead of forming the dense block
        dts_dtv = lat_dp * per_tv / den
        dJ_dtv = dj_dp * per_tv + dj_dt * dts_dtv
        u = self.n + 0  # the bordered system's column (and row) of the first coupling
        add(P, u, out_kap * dts_dtv)
        add(self.i_c, u, out_area * dJ_dtv)
        add(self.i_mv, u, dt * float((area * dJ_dtv).sum()))
        return float((area * dJ_dm).sum())

    def _evaporation_coupling(self, dt: float, ev: DeviceEvaluation, add) -> None:
        """The Jacobian's update column (n + 1) of the water's sensible enthalpy in the cap cells
        through the total evaporation E = sum A m_e(T_s), T_s eliminated per face."""
        c = ev.conduction
        faces = self.cap_faces
        col = self.n + 1
        if faces.size:
            kap, g1 = c.surface_conductance[faces], c.surface_derivative[faces]
            add(col, self._cap_face_cells, self._cap_area * ev.extras["dme_dt"] * kap / (kap - g1))
            add(self.cap_cells, col, -dt * ev.extras["sensible_per_evaporation"][self.cap_cells])
        else:
            add(self.cap_cells, col, 0.0)

    def _transfer_coupling(self, dt: float, ev: DeviceEvaluation, add) -> None:
        """The Jacobian's update column (n + 2) from h(t_surf) and h_m(t_surf), t_surf = w . T the
        outer cells' area-weighted mean; exact zeros where the coefficients are fixed."""
        ctx, c = ev.context, ev.conduction
        dh, dhm = self._transfer_derivatives(ctx["cap"]["surface_mean"], ctx["cap"]["h"], ctx["cap"]["h_m"])
        fixed = dh == 0.0 and dhm == 0.0
        room = self.spec.room
        col = self.n + 2
        add(col, self._outer_cells_of_faces, self._outer_weight)
        for faces, cells_of_faces, area, cap in self._transfer_groups:
            if fixed:
                add(cells_of_faces, col, 0.0)
                if cap:
                    add(self.cap_cells, col, 0.0)
                    if self.spec.cap_water.mode == "charge":
                        add(self.i_w, col, 0.0)
                continue
            if isinstance(add, _BlockWriter):  # the same values by kernels.device
                devap = _kd.transfer_jacobian(faces, area, c.surface_conductance, c.surface_derivative,
                                              c.surface_temperature, c.surface_terms, room.air_temperature, dh, cap,
                                              ev.evaporation, dhm, ctx["cap"]["h_m"], dt, self._cap_work,
                                              add.values, add.position)
                add.skip(1)
                if cap:
                    cells = self.cap_cells
                    add(cells, col, -dt * ev.extras["sensible_per_evaporation"][cells] * devap)
                    if self.spec.cap_water.mode == "charge":
                        add(self.i_w, col, dt * devap)
                continue
            kap, g1 = c.surface_conductance[faces], c.surface_derivative[faces]
            t_s = c.surface_temperature[faces]
            # dq/dt_surf at fixed T_s
            dq = (room.air_temperature - t_s) * dh
            if cap:
                m_e, h_m = ev.evaporation, ctx["cap"]["h_m"]
                lat = (c.surface_terms[faces, ks.LATENT] if c.surface_terms is not None
                       else water_latent_heat(t_s))
                dq = dq - lat * m_e * dhm / h_m
            den = kap - g1
            add(cells_of_faces, col, -dt * area * kap * dq / den)
            if cap:
                dts = dq / den
                devap = float((area * (ev.evaporation * dhm / ctx["cap"]["h_m"] + ev.extras["dme_dt"] * dts)).sum())
                cells = self.cap_cells
                add(cells, col, -dt * ev.extras["sensible_per_evaporation"][cells] * devap)
                if self.spec.cap_water.mode == "charge":
                    add(self.i_w, col, dt * devap)

    def _pool_jacobian(self, alpha0, dt, dm, ev, lumped, add) -> None:
        """The pool's entries: its contact with the glass (surface temperatures eliminated per face),
        its energy's dependence on its mass, and the joined vapour spaces' flow (exact zeros while
        the device stands, so that the pattern stays the run's)."""
        n, mesh, x, c = self.n_cells, self.mesh, ev.extras, ev.conduction
        b = self.pool_faces
        P = mesh.boundary_cell[b]
        kap, g1 = c.surface_conductance[b], c.surface_derivative[b]
        area = mesh.boundary_areas[b]
        # heat into cell P: H = A kap (T_s - T_P), q(T_s) = h (T_p - T_s) = kap (T_s - T_P)
        dh_dtp = area * kap * (-g1) / (kap - g1)        # dH/dT_pool (-g1 = h)
        dh_dtcell = area * kap * g1 / (kap - g1)        # dH/dT_P, already in the conduction block
        add(P, self.i_tb, -dt * dh_dtp)
        add(self.i_tb, P, dt * dh_dtcell)               # the pool's rate is -sum H
        t_p = ev.context["pool"]["temperature"]
        cl = self.body.liquid_heat_capacity
        g, dg_dm, dg_dt, e = x["joint_flow"], x["dg_dm"], x["dg_dt"], x["leaving_enthalpy"]
        lumped[self.i_tb - n] = dm[self.i_tb] * alpha0 + dt * float(dh_dtp.sum()) + dt * (dg_dt * e + g * cl)
        add(self.i_tb, self.i_mp, alpha0 * cl * (t_p - REFERENCE_TEMPERATURE))
        add(self.i_tb, self.i_mv, dt * dg_dm * e)
        lumped[self.i_mp - n] = alpha0
        add(self.i_mv, self.i_mv, -dt * dg_dm)
        add(self.i_mv, self.i_tb, -dt * dg_dt)
        add(self.i_mp, self.i_mv, dt * dg_dm)
        add(self.i_mp, self.i_tb, dt * dg_dt)


def _kernels_compiled() -> bool:
    """Whether the kernels are compiled (read when asked: the tests switch it)."""
    from fvsolver.kernels import COMPILED

    return COMPILED


class _Recorder:
    """``KeptTriplets.add`` that also notes each block's length (the first, recording call)."""

    def __init__(self, add):
        self.add, self.lengths = add, []

    def __call__(self, rows, cols, values) -> None:
        self.add(rows, cols, values)
        sizes = {np.size(rows), np.size(cols), np.size(values)} - {1}
        self.lengths.append(sizes.pop() if sizes else 1)


class _BlockWriter:
    """The later calls' ``add``: each block's values written at its recorded place in the kept
    assembly's values, in the recorded order (``KeptTriplets.add`` without its checks; the count
    of blocks is checked at the end). A kernel writes its blocks from ``position`` and skips them."""

    __slots__ = ("values", "ends", "block", "position")

    def __init__(self, values: np.ndarray, ends: np.ndarray):
        self.values, self.ends, self.block, self.position = values, ends, 0, 0

    def __call__(self, rows, cols, values) -> None:
        end = self.ends[self.block]
        self.values[self.position:end] = values
        self.position, self.block = end, self.block + 1

    def skip(self, count: int) -> None:
        self.block += count
        self.position = self.ends[self.block - 1]

    def finish(self) -> None:
        if self.block != len(self.ends):
            raise ValueError(f"device Jacobian: {self.block} blocks written, {len(self.ends)} recorded")
