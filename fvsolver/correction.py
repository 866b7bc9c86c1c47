"""The deferred non-orthogonal correction written out as an explicit affine operator.

:meth:`ConductionProblem.evaluate` adds two terms on top of the two-point fluxes when the mesh
is not orthogonal:

* on every interior face f (owner P, neighbour N),

  .. math:: q_f = k_f\\,\\big(w_f\\nabla T_P + (1 - w_f)\\nabla T_N\\big)\\cdot\\mathbf t_f,

  added to P and taken from N, with :math:`\\mathbf t_f = \\mathbf S_f - \\mathbf E_f`;
* on every fixed-temperature boundary face b of cell P, the offset part of the boundary heat,

  .. math:: -\\kappa_b A_b\\,\\nabla T_P\\cdot\\mathbf o_b, \\quad \\kappa_b = k_P/\\delta_b.

The least-squares gradients are linear in the cell temperatures and in the boundary-face
temperatures :math:`T_b`.  With a constant conductivity and affine boundary terms,
:math:`T_b` is itself affine in :math:`T_P` (the Dirichlet value on fixed-temperature
faces, :math:`(\\kappa T_P + a)/(\\kappa - b)` on flux faces whose terms sum to
:math:`q(T_s) = a + b T_s`), so the whole correction is :math:`C T + c_0`.  Folding
:math:`C` into the Jacobian turns a linear implicit step into one exact sparse solve instead
of a fixed-point iteration on the deferred term.
"""
from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from fvsolver.boundary import Convection, FixedTemperature, HeatFlux, Symmetry, _evaluate
from fvsolver.conduction import ConductionProblem
from fvsolver.errors import SolverError
from fvsolver.materials import REFERENCE_TEMPERATURE

AFFINE_FLUX_TERMS = (HeatFlux, Convection)

# boundary kinds of BoundaryData.kind
_FIXED, _FLUX, _SYMMETRY = 0, 1, 2


def _check_constant_conductivity(problem: ConductionProblem) -> None:
    """Raise SolverError unless every material's conductivity is a constant of T and context."""
    for name, material in zip(problem.mesh.material_names, problem.materials):
        conductivity = getattr(material, "conductivity", None)
        if getattr(material, "context_dependent", False) or not getattr(conductivity, "is_constant", False):
            raise SolverError(
                f"correction_operator: material {name!r} has a conductivity that depends on the "
                "temperature or on the coupled state, so the corrected operator is not affine in T; "
                "use constant conductivities or keep the correction deferred"
            )


def _affine_flux_coefficients(problem: ConductionProblem, time: float) -> tuple[np.ndarray, np.ndarray]:
    """Coefficients of the summed flux terms q(T_s) = a + b T_s on every boundary face.

    Returns
    -------
    a : (n_boundary,) W/m2
    b : (n_boundary,) W/(m2 K), <= 0 for physical terms
        Both zero on faces that are not of flux kind and on insulated faces.
    """
    mesh = problem.mesh
    a = np.zeros(mesh.n_boundary)
    b = np.zeros(mesh.n_boundary)
    for cond, faces in zip(problem.boundary.conditions, problem.boundary.faces):
        for k, term in enumerate(cond.terms):
            if isinstance(term, (FixedTemperature, Symmetry)):
                continue
            if not isinstance(term, AFFINE_FLUX_TERMS):
                raise SolverError(
                    f"correction_operator: boundary.{cond.patch}.terms[{k}] is "
                    f"{type(term).__name__}, which is not affine in the surface temperature; "
                    "only HeatFlux, Convection, FixedTemperature, Symmetry and insulated patches "
                    "give an affine corrected operator (keep the correction deferred otherwise)"
                )
            centres = mesh.boundary_centres[faces]
            # an affine term's tangent at any temperature recovers its intercept exactly
            t_probe = np.full(faces.size, REFERENCE_TEMPERATURE)
            q, dq = term.heat_flux(t_probe, time, centres)
            q = np.broadcast_to(np.asarray(q, dtype=float), t_probe.shape)
            dq = np.broadcast_to(np.asarray(dq, dtype=float), t_probe.shape)
            a[faces] += q - dq * t_probe
            b[faces] += dq
    return a, b


def _selection(rows: np.ndarray, n_cols: int) -> sp.csr_matrix:
    """(len(rows), n_cols) matrix with a single 1 per row, in column ``rows[i]``."""
    m = rows.size
    return sp.csr_matrix((np.ones(m), (np.arange(m), rows)), shape=(m, n_cols))


def correction_operator(
    problem: ConductionProblem, time: float = 0.0, *, honour_switch: bool = True
) -> tuple[sp.csr_matrix, np.ndarray]:
    """The deferred correction of ``problem``'s heat rate as an affine map C T + c0.

    For every temperature field T (K), ``C @ T + c0`` is the part of
    ``problem.evaluate(T, time).rate`` that the two-point fluxes and the uncorrected boundary
    heat leave out: the interior non-orthogonal face corrections plus, on fixed-temperature
    faces, the offset correction ``-kappa_b A_b grad_P . offset_b``.

    Parameters
    ----------
    problem : ConductionProblem
        Constant conductivity; boundary terms among HeatFlux, Convection, FixedTemperature,
        Symmetry (insulated patches have no terms).
    time : float, s
        Time at which time-dependent boundary values (Dirichlet temperatures, fluxes, h and
        ambient temperatures) are taken.
    honour_switch : bool
        When True and the problem applies no correction (``problem.correct`` False: switched
        off, or an orthogonal mesh), return the zero operator as ``evaluate`` does.  When
        False, build the operator from the geometry regardless.

    Returns
    -------
    C : scipy.sparse.csr_matrix, (n_cells, n_cells), W/K
    c0 : (n_cells,) ndarray, W

    Raises
    ------
    SolverError
        If a conductivity is not constant or a boundary term is not affine.
    """
    _check_constant_conductivity(problem)
    a, b = _affine_flux_coefficients(problem, time)
    mesh, st, bnd = problem.mesh, problem.stencil, problem.boundary
    n = mesh.n_cells
    if honour_switch and not problem.correct:
        return sp.csr_matrix((n, n)), np.zeros(n)

    k = np.asarray(problem.conductivity(np.full(n, REFERENCE_TEMPERATURE)), dtype=float)
    bc = mesh.boundary_cell
    kappa = k[bc] / st.boundary_distance
    # same harmonic face conductivity as evaluate (k_f = g_f / geometry_f)
    kf = (st.dist_owner + st.dist_neighbour) / (
        st.dist_owner / k[mesh.owner] + st.dist_neighbour / k[mesh.neighbour]
    )

    # boundary-face temperatures T_b = alpha_b T_P + beta_b
    kind = bnd.kind
    alpha = np.ones(mesh.n_boundary)  # symmetry faces: T_b = T_P, and their lsq weight is zero anyway
    beta = np.zeros(mesh.n_boundary)
    fixed = kind == _FIXED
    alpha[fixed] = 0.0
    for cond, faces in zip(bnd.conditions, bnd.faces):
        if cond.kind == "temperature":
            beta[faces] = _evaluate(cond.terms[0].temperature, mesh.boundary_centres[faces], time)
    flux = kind == _FLUX
    denom = kappa[flux] - b[flux]
    alpha[flux] = kappa[flux] / denom
    beta[flux] = a[flux] / denom

    s_own = _selection(mesh.owner, n)  # (n_faces, n)
    s_nei = _selection(mesh.neighbour, n)
    s_bnd = _selection(bc, n)  # (n_boundary, n)
    diff = s_nei - s_own  # D T = T_N - T_P per face
    # T_b - T_P = (alpha - 1) T_P + beta
    bdiff = sp.diags(alpha - 1.0) @ s_bnd
    # face interpolation of cell values, w_f owner + (1 - w_f) neighbour
    interp = sp.diags(st.weight_owner) @ s_own + sp.diags(1.0 - st.weight_owner) @ s_nei
    # heat into P from face f is +q_f for the owner and -q_f for the neighbour: -D^T q
    scatter_faces = -diff.T.tocsr()
    scatter_bnd = s_bnd.T.tocsr()
    dirichlet_weight = np.where(fixed, kappa * mesh.boundary_areas, 0.0)

    C = sp.csr_matrix((n, n))
    c0 = np.zeros(n)
    for c in range(2):
        # gradient component c: G_c T + g_c
        G = (s_own.T @ sp.diags(st.lsq_owner[:, c]) @ diff
             + s_nei.T @ sp.diags(st.lsq_neighbour[:, c]) @ diff
             + s_bnd.T @ sp.diags(st.lsq_boundary[:, c]) @ bdiff)
        g = s_bnd.T @ (st.lsq_boundary[:, c] * beta)
        # what gradient component c contributes to the heat rate of each cell
        M = (scatter_faces @ sp.diags(kf * st.tangent[:, c]) @ interp
             - scatter_bnd @ sp.diags(dirichlet_weight * st.boundary_offset[:, c]) @ s_bnd)
        C = C + M @ G
        c0 += M @ g
    C = sp.csr_matrix(C)
    C.sum_duplicates()
    C.sort_indices()
    return C, c0
