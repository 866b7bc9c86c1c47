"""The conduction problem: stored energy and heat rate of every cell, and their Jacobian.

For cell P, with e(T) the specific internal energy,

.. math:: \\frac{\\mathrm d}{\\mathrm dt}\\left(\\rho_P V_P e(T_P)\\right)
          = \\sum_f F_f + \\sum_b A_b q_b + S_P V_P

The stepper advances ``capacity`` (m = rho V e) against ``evaluate`` (the right-hand side).
"""
from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from fvsolver.boundary import (BoundaryData, Convection, HeatFlux, PatchCondition, _evaluate,
                               compile_boundary)
from fvsolver.deferred import deferred
from fvsolver.discretisation import Stencil, build_stencil
from fvsolver.errors import CaseError
from fvsolver.kernels import conduction as kern
from fvsolver.kernels import surfaces as _ks
from fvsolver.linear import with_data
from fvsolver.materials import REFERENCE_TEMPERATURE, Material
from fvsolver.mesh.core import Mesh, distinct
from fvsolver.surface_balance import SURFACE_ITERATIONS, solve_surface as _solve_surface, term_sum as _term_sum

sp = deferred("scipy.sparse", "sp", globals())  # imported by the first Jacobian, not by a set-up


# the per-cell properties a material's uniform_properties(context) gives, by index
_UNIFORM_INDEX = {"conductivity_at": 0, "volumetric_heat_capacity": 1}


@dataclass(frozen=True)
class VolumetricSource:
    """Heat generated inside the body, W/m3 (a number or f(centres (n, 2), time))."""

    power_density: float | Callable
    material: str | None = None


@dataclass(frozen=True)
class Evaluation:
    """The heat rate at one state.

    Attributes
    ----------
    rate : (n_cells,) W, net heat into each cell
    boundary_jacobian : (n_cells,) W/K, d(boundary heat into P)/dT_P (<= 0)
    conductance : (n_faces,) W/K, two-point face conductances
    surface_temperature : (n_boundary,) K
    boundary_heat : (n_boundary,) W, heat into the body through each boundary face
    source_heat : float, W
    surface_conductance : (n_boundary,) W/(m2 K), k_P / delta (cell to face)
    surface_derivative : (n_boundary,) W/(m2 K), dq/dT_s of the flux terms at the surface
    surface_terms : (n_boundary, kernels.surfaces.OUTPUTS) or None, the compiled solve's outputs
        (mass flux, its derivatives, latent heat) on the coupled faces it solved
    """

    rate: np.ndarray
    boundary_jacobian: np.ndarray
    conductance: np.ndarray
    surface_temperature: np.ndarray
    boundary_heat: np.ndarray
    source_heat: float
    surface_conductance: np.ndarray | None = None
    surface_derivative: np.ndarray | None = None
    surface_terms: np.ndarray | None = None

    @property
    def heat_in(self) -> float:
        return float(self.boundary_heat.sum() + self.source_heat)

    def inflow(self, group: str) -> float:
        """Net inflow of a conserved total (here only energy, W)."""
        return self.heat_in

    def gross(self, group: str) -> float:
        """Gross exchange of a conserved total: the scale of its balance error."""
        return self.gross_heat

    @property
    def gross_heat(self) -> float:
        return float(np.abs(self.boundary_heat).sum() + abs(self.source_heat))


@dataclass(frozen=True)
class AffineOperator:
    """A problem whose heat rate is F(T) = A T + f0 with fixed A and f0 (see affine_operator).

    Attributes
    ----------
    A : (n, n) CSR, W/K, dF/dT
    f0 : (n,) W
    inflow : (n,) W/K, column sums of A: the heat in is inflow . T + inflow0
    inflow0 : float, W
    capacity : (n,) J/K, dm/dT
    evaluation : Evaluation at ``reference``
    reference : (n,) K
    """

    A: sp.csr_matrix
    f0: np.ndarray
    inflow: np.ndarray
    inflow0: float
    capacity: np.ndarray
    evaluation: Evaluation
    reference: np.ndarray

    @cached_property
    def capacity_total(self) -> float:
        """Heat capacity of the whole body, J/K."""
        return float(self.capacity.sum())

    def gross(self, T: np.ndarray) -> float:
        """Scale of the gross boundary exchange at T (W), for the balance check."""
        return self.gross_constant + kern.gross_exchange(T, self.boundary_cells, self.boundary_slope, self.reference)

    @cached_property
    def gross_constant(self) -> float:
        ev = self.evaluation
        return float(np.abs(ev.boundary_heat).sum()) + abs(ev.source_heat)

    @cached_property
    def boundary_cells(self) -> np.ndarray:
        return np.flatnonzero(self.evaluation.boundary_jacobian)

    @cached_property
    def boundary_slope(self) -> np.ndarray:
        return self.evaluation.boundary_jacobian[self.boundary_cells]


class ConductionProblem:
    """Transient conduction on a mesh with materials, boundary conditions and sources.

    Parameters
    ----------
    mesh : Mesh
    materials : dict
        Material tag to :class:`~fvsolver.materials.Material`; every tag of the mesh needs one.
    conditions : list of PatchCondition
    sources : list of VolumetricSource
    nonorthogonal_correction : bool
        Apply the deferred correction where the mesh is not orthogonal.
    """

    def __init__(
        self,
        mesh: Mesh,
        materials: dict[str, Material],
        conditions: list[PatchCondition],
        sources: tuple = (),
        nonorthogonal_correction: bool = True,
    ) -> None:
        missing = [m for m in mesh.material_names if m not in materials]
        if missing:
            raise CaseError(
                f"materials: no properties for mesh material(s) {missing} (got {sorted(materials)}); "
                "give every material tag of the mesh its properties"
            )
        self.mesh = mesh
        self.materials = tuple(materials[name] for name in mesh.material_names)
        self.boundary: BoundaryData = compile_boundary(mesh, conditions)
        self.stencil: Stencil = build_stencil(mesh, self.boundary.symmetry)
        self.sources = tuple(sources)
        for k, s in enumerate(self.sources):
            if s.material is not None and s.material not in mesh.material_names:
                raise CaseError(
                    f"sources[{k}].material: got {s.material!r}, expected one of {list(mesh.material_names)}"
                )
        self.n = mesh.n_cells
        self.correct = bool(nonorthogonal_correction) and (
            self.stencil.nonorthogonal or self.stencil.boundary_nonorthogonal)
        self._constant_k = all(not m.context_dependent and m.conductivity.is_constant for m in self.materials)
        self._constant_c = all(not m.context_dependent and m.heat_capacity.is_constant for m in self.materials)
        self._cells = [np.flatnonzero(mesh.cell_material == i) for i in range(len(self.materials))]
        self._fixed_per_cell = {}
        self._uniform_kept = {}  # attribute: (the materials' numbers, the per-cell array filled from them)
        self._capacity_kept = None  # (rho c per cell, V rho c, energy factors) of the last uniform rho c
        self._energy_template = None  # (rho, c, materials filled per context) of _energy_factors, or ()
        self._kappa_kept = None  # (k, k_P / delta of the boundary faces) of the last conductivities
        self._boundary_cells = distinct(mesh.boundary_cell)
        self._surface_guess: np.ndarray | None = None
        self._correction_cache = None
        self._capacity_cache = None
        self._affine = None
        self._k_constant = None
        if self._constant_k:
            self._k_constant = self._per_cell(np.full(self.n, REFERENCE_TEMPERATURE), "conductivity_at", None)
        # boundary faces of flux kind, grouped by condition, for vectorised term sums
        self._flux_groups = [
            (c, f) for c, f in zip(self.boundary.conditions, self.boundary.faces) if c.kind == "flux"
        ]
        self._dirichlet_groups = [
            (c, f) for c, f in zip(self.boundary.conditions, self.boundary.faces) if c.kind == "temperature"
        ]
        self._every_flux_group = self._flux_groups
        self._compiled = None
        self._g_last = self._kf_last = None
        self.compile_surfaces(True)
        g = np.empty(mesh.n_faces)
        if self._constant_k:
            kern.face_conductance(self._k_constant, mesh.owner, mesh.neighbour, self.stencil.dist_owner,
                                  self.stencil.dist_neighbour, self.stencil.geometry, g)
        self._g_constant = g if self._constant_k else None

    def compile_surfaces(self, on: bool, fused: bool = True) -> None:
        """Solve the coupled patches' surface balances in the compiled kernel (on, where numba's JIT
        is on) or with their terms' NumPy ``heat_flux`` (off: the twin the tests compare with);
        ``fused``: where it can, the whole evaluation in one compiled call (off: the separate
        kernels and NumPy sums it replaces, its twin)."""
        self._compiled = _compiled_surfaces(self._every_flux_group, self.mesh.n_boundary) if on else None
        self._flux_groups = self._every_flux_group
        if self._compiled is not None:
            self._flux_groups = [(c, f) for c, f in self._every_flux_group if not _compilable(c)]
        # the whole heat rate in one compiled call, where nothing but the coupled faces needs a
        # boundary solve (no fixed temperatures, every other flux face insulated)
        self._fused = fused and self._compiled is not None and not self._dirichlet_groups and not any(
            c.terms for c, _ in self._flux_groups)
        if self._fused:
            n, nb = self.n, self.mesh.n_boundary
            # work arrays of the fused call (no evaluation hands them out)
            self._work = (np.empty(n), np.empty(nb), np.empty((n, 2)))

    # -- properties -------------------------------------------------------------------------
    def _per_cell(self, T: np.ndarray, attribute: str, context) -> np.ndarray:
        fixed = self._fixed_per_cell.get(attribute)
        if fixed is None:
            split = self._split_fixed(attribute)
            # materials whose k and rho c are one number each at a context (PorousCap.uniform_properties)
            uniform = bool(split[1]) and all(hasattr(m, "uniform_properties") for m, _ in split[1])
            fixed = self._fixed_per_cell[attribute] = (*split, uniform)
        base, varying, energy, uniform = fixed
        index = _UNIFORM_INDEX.get(attribute) if uniform else None
        if index is not None:
            # filled from those numbers, and kept while they stay the same (never written to)
            values = tuple(m.uniform_properties(context)[index] for m, _ in varying)
            kept = self._uniform_kept.get(attribute)
            if kept is not None and kept[0] == values:
                return kept[1]
            out = np.empty(self.n) if base is None else base.copy()
            for (_, cells), value in zip(varying, values):
                out[cells] = value
            self._uniform_kept[attribute] = (values, out)
            return out
        out = np.empty(self.n) if base is None else base.copy()
        if energy is not None:  # Material.volumetric_energy of a constant c: rho (c (T - T_ref))
            cells, rho, c = energy
            out[cells] = rho * (c * (T[cells] - REFERENCE_TEMPERATURE))
        for m, cells in varying:
            if uniform and attribute == "volumetric_energy":  # rho c (T - T_ref), as the material gives it
                out[cells] = m.uniform_properties(context)[1] * (T[cells] - REFERENCE_TEMPERATURE)
            else:
                out[cells] = getattr(m, attribute)(T[cells], context)
        return out

    def _split_fixed(self, attribute: str):
        """(values of the materials whose property is one constant, filled once, or None; the
        (material, cells) pairs left to evaluate at every call; for the stored energy, the cells
        of constant-c materials with their rho and c, or None)."""
        pairs = list(zip(self.materials, self._cells))
        # the property behind each attribute (the stored energy is the heat capacity's integral)
        prop = {"conductivity_at": "conductivity", "volumetric_heat_capacity": "heat_capacity",
                "volumetric_energy": "heat_capacity"}.get(attribute)
        is_fixed = [prop is not None and type(m) is Material and getattr(m, prop).is_constant for m, _ in pairs]
        if not any(is_fixed):
            return None, pairs, None
        left = [pair for pair, f in zip(pairs, is_fixed) if not f]
        if attribute == "volumetric_energy":
            chosen = [(m, cells) for (m, cells), f in zip(pairs, is_fixed) if f]
            cells = np.concatenate([c for _, c in chosen])
            rho = np.concatenate([np.full(c.size, m.density) for m, c in chosen])
            c = np.concatenate([np.full(c.size, m.heat_capacity.coefficients[0]) for m, c in chosen])
            return None, left, (cells, rho, c)
        base = np.zeros(self.n)
        for (m, cells), f in zip(pairs, is_fixed):
            if f:
                base[cells] = getattr(m, attribute)(np.full(cells.size, REFERENCE_TEMPERATURE), None)
        return base, left, None

    def conductivity(self, T: np.ndarray, context=None) -> np.ndarray:
        """(n_cells,) W/(m K)."""
        if self._k_constant is not None:
            return self._k_constant
        return self._per_cell(T, "conductivity_at", context)

    @property
    def linear(self) -> bool:
        """True when the heat rate is affine in T and the stored energy linear in T."""
        return self._constant_k and self._constant_c and self.boundary.linear

    @property
    def exact_jacobian(self) -> bool:
        """True when one Newton iteration solves a step exactly: an affine problem whose
        non-orthogonal correction, if any, is folded into the Jacobian."""
        return self.linear and (not self.correct or self._implicit_correction is not None)

    @property
    def _implicit_correction(self):
        """(C, column sums of C) when the correction can be written C T + c0 once and for all."""
        if not (self.correct and self.linear and not self.boundary.coefficients_vary):
            return None
        if self._correction_cache is None:
            from fvsolver.correction import correction_operator

            C, _ = correction_operator(self, 0.0)
            self._correction_cache = (C.tocsr(), np.asarray(C.sum(axis=0)).ravel())
        return self._correction_cache

    @property
    def constant_jacobian(self) -> bool:
        """True when the Jacobian depends on the step (alpha0, dt) only."""
        return self.linear and not self.boundary.coefficients_vary

    # -- the stepper's interface ----------------------------------------------------------------
    def capacity(self, T: np.ndarray, context=None) -> tuple[np.ndarray, np.ndarray]:
        """Stored energy m = V rho e(T) (J, from 273.15 K) and dm/dT = V rho c(T) (J/K)."""
        v = self.mesh.cell_volumes
        if self._constant_c:  # rho c fixed: m = (V rho c) (T - T_ref), no per-material gather
            if self._capacity_cache is None:
                self._capacity_cache = v * self._per_cell(T, "volumetric_heat_capacity", context)
            dm = self._capacity_cache
            return dm * (T - REFERENCE_TEMPERATURE), dm
        rho_c = self._per_cell(T, "volumetric_heat_capacity", context)
        kept = self._capacity_kept
        if kept is None or kept[0] is not rho_c:  # rho c kept by _per_cell: so is V rho c (never written to)
            kept = (rho_c, v * rho_c, self._energy_factors(context))
            if self._fixed_per_cell["volumetric_heat_capacity"][3]:
                self._capacity_kept = kept
        factors = kept[2]
        if factors is not None:  # every cell's energy rho (c (T - T_ref)) from two kept factors: one call
            m = np.empty(self.n)
            kern.stored_energy(T, v, factors[0], factors[1], REFERENCE_TEMPERATURE, m)
            return m, kept[1]
        return v * self._per_cell(T, "volumetric_energy", context), kept[1]

    def _energy_factors(self, context):
        """(rho, c) per cell such that the stored energy per volume is rho (c (T - T_ref)), the
        products ``_per_cell(T, "volumetric_energy")`` forms (a material whose rho c is one number at
        the context: rho c and 1), or None where a material's c follows T."""
        template = self._energy_template
        if template is None:
            if "volumetric_energy" not in self._fixed_per_cell:
                self._per_cell(np.full(self.n, REFERENCE_TEMPERATURE), "volumetric_energy", context)
            base, varying, energy, uniform = self._fixed_per_cell["volumetric_energy"]
            rho, c = np.full(self.n, np.nan), np.ones(self.n)
            if energy is not None:
                rho[energy[0]], c[energy[0]] = energy[1], energy[2]
            for _, cells in varying:
                rho[cells] = 0.0
            every = base is None and uniform and not np.isnan(rho).any()
            template = self._energy_template = (rho, c, varying) if every else ()
        if not template:
            return None
        rho, c, varying = template
        rho = rho.copy()  # (the kept factors are never written to)
        for m, cells in varying:
            rho[cells] = m.uniform_properties(context)[1]
        return rho, c

    def _surface(self, T, time, k, context=None):
        """Surface temperatures, heat fluxes and their T_P derivatives on every boundary face, at
        the cells' own temperatures (the fixed-temperature faces' offset correction, which needs
        the gradients, is ``_offset_correction``)."""
        mesh = self.mesh
        bc = mesh.boundary_cell
        kappa = self._surface_conductance(k)
        # the tangential offset (non-orthogonal boundary cells) is corrected on fixed-temperature
        # faces; on flux faces the surface balance is taken at the cell's own temperature, so the
        # surface solve never waits on the gradients (first order in the offset there)
        t_foot = T[bc]
        t_s = t_foot.copy()
        nb = t_s.size
        q = np.zeros(nb)
        dq_dtp = np.zeros(nb)
        g1_all = np.zeros(nb)
        for cond, faces in self._dirichlet_groups:
            t_s[faces] = _evaluate(cond.terms[0].temperature, mesh.boundary_centres[faces], time)
            q[faces] = kappa[faces] * (t_s[faces] - t_foot[faces])
            dq_dtp[faces] = -kappa[faces]
        surface_terms = None
        if self._compiled is not None:
            # every coupled face in one compiled call, which writes its faces' entries in place
            surface_terms = np.full((nb, _ks.OUTPUTS), np.nan)
            self._compiled.solve_into(kappa, t_foot, self._surface_guess, mesh.boundary_centres, context,
                                      t_s, q, dq_dtp, g1_all, surface_terms)
        for cond, faces in self._flux_groups:
            if not cond.terms:
                continue
            kf, tf, xc = kappa[faces], t_foot[faces], mesh.boundary_centres[faces]
            if all(isinstance(t, (HeatFlux, Convection)) for t in cond.terms):
                # affine in T_s: one Newton step from anywhere is exact
                g0, g1 = _term_sum(cond.terms, tf, time, xc, faces, context)
                ts = tf + g0 / (kf - g1)
            else:
                guess = None if self._surface_guess is None else self._surface_guess[faces]
                ts = _solve_surface(cond.terms, kf, tf, guess, time, xc, faces, context)
            g0, g1 = _term_sum(cond.terms, ts, time, xc, faces, context)
            t_s[faces] = ts
            g1_all[faces] = g1
            q[faces] = kf * (ts - tf)
            dq_dtp[faces] = kf * g1 / (kf - g1)
        self._last_surface = (kappa, g1_all, surface_terms)
        return t_s, q, dq_dtp

    def _surface_conductance(self, k: np.ndarray) -> np.ndarray:
        """k_P / delta of every boundary face, W/(m2 K); kept with the conductivities it came from."""
        kept = self._kappa_kept
        if kept is not None and kept[0] is k:  # the same kept conductivities (never written to)
            return kept[1]
        kappa = k[self.mesh.boundary_cell] / self.stencil.boundary_distance
        self._kappa_kept = (k, kappa)
        return kappa

    def _offset_correction(self, T, grad, t_s, q) -> None:
        """The fixed-temperature faces' heat flux from the foot of the face normal through the cell
        centre (T_P + grad T . offset), in place on q."""
        mesh, st = self.mesh, self.stencil
        kappa = self._last_surface[0]
        for _, faces in self._dirichlet_groups:
            cells = mesh.boundary_cell[faces]
            foot = T[cells] + grad[cells, 0] * st.boundary_offset[faces, 0] + grad[cells, 1] * st.boundary_offset[faces, 1]
            q[faces] = kappa[faces] * (t_s[faces] - foot)

    def evaluate(self, T: np.ndarray, time: float, context=None) -> Evaluation:
        """Heat rate into every cell at temperature ``T`` (K) and ``time`` (s).

        ``context`` carries the coupled lumped state (cap water, vapour space) to the
        materials and boundary terms that depend on it.
        """
        if self._fused:
            return self._evaluate_fused(T, time, context)
        mesh, st = self.mesh, self.stencil
        k = self.conductivity(T, context)
        g = self._face_conductance(k)
        rate = np.zeros(self.n)
        kern.face_flux_sum(T, mesh.owner, mesh.neighbour, g, rate)
        # surface temperatures first (they do not need the gradients), then, with the correction,
        # the gradients, the fixed-temperature faces' offset correction and the face corrections
        t_s, q, dq = self._surface(T, time, k, context)
        if self.correct:
            grad = np.zeros((self.n, 2))
            kern.cell_gradients(T, mesh.owner, mesh.neighbour, st.lsq_owner, st.lsq_neighbour,
                                mesh.boundary_cell, st.lsq_boundary, t_s, grad)
            self._offset_correction(T, grad, t_s, q)
            self._surface_guess = t_s
            kern.correction_flux_sum(grad, mesh.owner, mesh.neighbour, self._face_k(g), st.weight_owner,
                                     st.tangent, rate)
        elif not self.boundary.linear:
            self._surface_guess = t_s
        area = mesh.boundary_areas
        boundary_heat = area * q
        rate += np.bincount(mesh.boundary_cell, boundary_heat, self.n)
        bjac = np.bincount(mesh.boundary_cell, area * dq, self.n)
        source_heat = self._add_sources(rate, time)
        kappa, g1, surface_terms = self._last_surface
        return Evaluation(rate, bjac, g, t_s, boundary_heat, source_heat, kappa, g1, surface_terms)

    def _evaluate_fused(self, T: np.ndarray, time: float, context) -> Evaluation:
        """``evaluate`` in one compiled call (``kernels.surfaces.evaluate_heat_rate``: the same
        operations in the same order as the separate kernels and bincounts, so the same values)."""
        mesh, st, compiled = self.mesh, self.stencil, self._compiled
        k = self.conductivity(T, context)
        g = self._face_conductance(k)
        kappa = self._surface_conductance(k)
        params = compiled.parameters(mesh.boundary_centres, context)
        n, nb = self.n, mesh.n_boundary
        rate, bjac = np.empty(n), np.empty(n)
        t_s, q, g1, boundary_heat = np.empty(nb), np.empty(nb), np.empty(nb), np.empty(nb)
        terms = np.empty((nb, _ks.OUTPUTS))
        guess = self._surface_guess
        face_k = self._face_k(g) if self.correct else g
        work, dq_dtp, grad = self._work
        _ks.evaluate_heat_rate(T, g, mesh.owner, mesh.neighbour, mesh.boundary_cell, mesh.boundary_areas,
                               self.correct, st.lsq_owner, st.lsq_neighbour, st.lsq_boundary, face_k,
                               st.weight_owner, st.tangent, compiled.kinds, params, compiled.faces, kappa,
                               _NO_GUESS if guess is None else guess, compiled.fluid, compiled.water,
                               compiled.water_latent, work, dq_dtp, grad, rate, bjac, t_s, q, g1, boundary_heat,
                               terms)
        if self.correct or not self.boundary.linear:
            self._surface_guess = t_s
        source_heat = self._add_sources(rate, time) if self.sources else 0.0
        self._last_surface = (kappa, g1, terms)
        return Evaluation(rate, bjac, g, t_s, boundary_heat, source_heat, kappa, g1, terms)

    def _add_sources(self, rate: np.ndarray, time: float) -> float:
        """The volumetric sources' heat added to ``rate`` in place; their total, W."""
        mesh = self.mesh
        source_heat = 0.0
        for s in self.sources:
            sel = slice(None) if s.material is None else mesh.cell_material == mesh.material_names.index(s.material)
            centres = mesh.cell_centres[sel]
            power = _evaluate(s.power_density, centres, time) * mesh.cell_volumes[sel]
            rate[sel] += power
            source_heat += float(power.sum())
        return source_heat

    def _face_conductance(self, k: np.ndarray) -> np.ndarray:
        """Two-point face conductances (W/K) of the conductivities k; the last pair is kept (the
        conductivity follows only the cap's saturation, constant over most steps). The array
        handed out is never written to, so evaluations that hold it stay valid."""
        if self._g_constant is not None:
            return self._g_constant
        last = self._g_last
        if last is not None and (last[0] is k or np.array_equal(last[1], k)):
            return last[2]  # (the same kept conductivities, or equal ones)
        mesh, st = self.mesh, self.stencil
        g = np.empty(mesh.n_faces)
        kern.face_conductance(k, mesh.owner, mesh.neighbour, st.dist_owner, st.dist_neighbour, st.geometry, g)
        self._g_last = (k, k.copy(), g)
        return g

    def _face_k(self, g: np.ndarray) -> np.ndarray:
        """g / geometry, the face conductivities of the correction (kept with the g they came from)."""
        kept = self._kf_last
        if kept is None or kept[0] is not g:
            kept = self._kf_last = (g, g / self.stencil.geometry)
        return kept[1]

    def jacobian(self, alpha0: float, dt: float, dm: np.ndarray, ev: Evaluation) -> sp.csr_matrix:
        """J = alpha0 dm/dT - dt dF/dT (two-point part; the deferred correction is left out)."""
        st = self.stencil
        data = np.empty_like(st.pattern.data)
        self.jacobian_values(alpha0, dt, dm, ev, data)
        J = with_data(st.pattern, data)  # the stencil's structure, checked when it was built
        implicit = self._implicit_correction
        if implicit is not None:
            J = (J - dt * implicit[0]).tocsr()
        return J

    def jacobian_values(self, alpha0: float, dt: float, dm: np.ndarray, ev: Evaluation, out: np.ndarray) -> None:
        """The two-point Jacobian's CSR values (the stencil's pattern, ``jacobian``'s without the
        implicit correction) written into ``out`` (nnz,)."""
        st = self.stencil
        diag = alpha0 * dm - dt * ev.boundary_jacobian
        kern.fill_jacobian(out, st.diag_pos, st.owner_pos, st.neighbour_pos, self.mesh.owner,
                           self.mesh.neighbour, diag, ev.conductance, dt)

    def affine_operator(self):
        """F(T) = A T + f0 with everything fixed in time, or None when the problem is not so.

        Lets the stepper take a linear step as a residual update and one solve, without
        re-evaluating boundary conditions it already knows.
        """
        if self._affine is not None:
            return self._affine or None
        values = [getattr(t, n, None) for c in self.boundary.conditions for t in c.terms
                  for n in ("temperature", "flux", "h", "ambient_temperature")]
        timeless = not any(callable(v) for v in values) and not any(callable(s.power_density) for s in self.sources)
        if not (self.exact_jacobian and timeless):
            self._affine = False
            return None
        t_ref = np.full(self.n, REFERENCE_TEMPERATURE + 20.0)
        ev = self.evaluate(t_ref, 0.0)
        _, dm = self.capacity(t_ref)
        A = self.jacobian(0.0, -1.0, dm, ev)  # alpha0 = 0, dt = -1: the matrix is dF/dT
        f0 = ev.rate - A @ t_ref
        self._affine = AffineOperator(A, f0, np.asarray(A.sum(axis=0)).ravel(), float(f0.sum()), dm, ev, t_ref)
        return self._affine

    def inflow_change(self, ev: Evaluation, delta: np.ndarray) -> tuple[float, float]:
        """Exact change of the heat in (W) of an affine problem for a change ``delta`` of T, and a
        bound on the change of its gross exchange."""
        cells = self._boundary_cells
        d = delta[cells]
        change = float((ev.boundary_jacobian[cells] * d).sum())
        implicit = self._implicit_correction
        if implicit is not None:
            change += float((implicit[1] * delta).sum())
        return change, float(np.abs(ev.boundary_jacobian[cells] * d).sum())

    def balance_groups(self) -> dict[str, slice]:
        """Which entries of the state make up each conserved total."""
        return {"energy": slice(0, self.n)}


def _compilable(cond) -> bool:
    """A patch whose one term hands its parameters to the compiled surface solve."""
    return len(cond.terms) == 1 and hasattr(cond.terms[0], "surface_parameters")


@dataclass(frozen=True)
class _CompiledSurfaces:
    """The coupled patches solved together by ``kernels.surfaces.solve_boundary_faces``."""

    groups: tuple          # (term, faces) per patch
    faces: np.ndarray      # every face, in the groups' order
    kinds: np.ndarray
    fluid: np.ndarray
    water: np.ndarray
    water_latent: np.ndarray

    kept: list = field(default_factory=lambda: [None], compare=False)  # the parameter rows

    def parameters(self, centres, context) -> np.ndarray:
        """(n, PARAMETERS), every group's rows. The rows are kept: a term with
        ``update_surface_parameters(rows, faces, context)`` has them filled once by its
        ``surface_parameters`` and then rewrites only the columns its context sets, in place (the
        kernel only reads them, and no evaluation keeps them)."""
        rows = self.kept[0]
        if rows is None:
            rows = self.kept[0] = np.concatenate([term.surface_parameters(f, centres[f], context)
                                                  for term, f in self.groups])
            # each group's view of the rows and how it rewrites them (update_surface_parameters or None)
            views, start = [], 0
            for term, f in self.groups:
                views.append((term, f, rows[start:start + f.size], getattr(term, "update_surface_parameters", None)))
                start += f.size
            self.kept.append(views)
            return rows
        for term, f, view, update in self.kept[1]:
            if update is None:
                view[:] = term.surface_parameters(f, centres[f], context)
            else:
                update(view, f, context)
        return rows

    def solve_into(self, kappa, t_foot, guess, centres, context, t_s, q, dq_dtp, g1, terms) -> None:
        """Solve the coupled faces from the boundary-wide kappa, t_foot and guess (None: start at
        t_foot), writing their entries of t_s, q, dq_dtp, g1 (n_boundary,) and terms (n_boundary,
        OUTPUTS) in place (``kernels.surfaces.solve_boundary_faces``)."""
        params = self.parameters(centres, context)
        _ks.solve_boundary_faces(self.kinds, params, self.faces, kappa, t_foot, _NO_GUESS if guess is None else guess,
                                 self.fluid, self.water, self.water_latent, t_s, q, dq_dtp, g1, terms)


_NO_GUESS = np.zeros(0)


def _compiled_surfaces(flux_groups, n_boundary: int):
    """The compiled solve of the coupled patches, or None (none there, or numba's JIT switched off:
    then the terms' own NumPy ``heat_flux`` are solved by ``surface_balance.solve_surface``)."""
    from fvsolver.kernels import COMPILED

    groups = []
    for c, f in flux_groups:
        if not _compilable(c):
            continue
        # patches with equal terms share one group (one parameter update per evaluation); the faces
        # are solved one by one, so their order changes nothing
        same = next((i for i, (term, _) in enumerate(groups) if _same_term(term, c.terms[0])), None)
        if same is None:
            groups.append((c.terms[0], f))
        else:
            groups[same] = (groups[same][0], np.concatenate([groups[same][1], f]))
    if not groups or not COMPILED:
        return None
    fluid = np.zeros(_ks.FLUID_CONSTANTS)
    for term, _ in groups:
        if hasattr(term, "fluid_constants"):
            fluid = np.ascontiguousarray(term.fluid_constants(), dtype=np.float64)
    kinds = np.concatenate([np.full(len(f), term.surface_kind, dtype=np.int64) for term, f in groups])
    water, water_latent = _ks.water_constants()
    return _CompiledSurfaces(tuple(groups), np.concatenate([f for _, f in groups]), kinds, fluid, water,
                             water_latent)


def _same_term(a, b) -> bool:
    """Whether two boundary terms are the same (one object, or equal data; terms holding arrays
    are taken as different)."""
    if a is b:
        return True
    if type(a) is not type(b):
        return False
    try:
        return bool(a == b)
    except (ValueError, TypeError):
        return False


def heat_flux_vectors(problem: ConductionProblem, T: np.ndarray, ev: Evaluation) -> np.ndarray:
    """Cell heat-flux vectors q = -k grad T, (n_cells, 2) W/m2, from least-squares gradients."""
    mesh, st = problem.mesh, problem.stencil
    grad = np.zeros((problem.n, 2))
    kern.cell_gradients(T, mesh.owner, mesh.neighbour, st.lsq_owner, st.lsq_neighbour, mesh.boundary_cell,
                        st.lsq_boundary, ev.surface_temperature, grad)
    return -problem.conductivity(T)[:, None] * grad
