"""Azimuthal harmonics ``m >= 1`` of the soft-iron cell solve (off-axis and tilted sources).

The ring cells of :mod:`fields.physics.iron` carry the axisymmetric (``m = 0``) polarization. An
excitation that is not axisymmetric about the cores' axis (a floater displaced sideways or
tilted, a coil or magnet off the axis) also drives harmonics ``m = 1, 2, ...`` of the cell
polarization. Per cell and harmonic there are two families of uniform (in ``r, z``) unknowns

    cos family: ``J = a cos(m phi) e_r - b sin(m phi) e_phi + c cos(m phi) e_z``,
    sin family: ``J = a sin(m phi) e_r + b cos(m phi) e_phi + c sin(m phi) e_z``

(the sin family is the cos family turned by ``pi / (2 m)``; for ``m = 1`` and ``a = b`` the cell is
uniformly polarized along x or y). Harmonics and families decouple on a body of revolution, so
each harmonic has one symmetric positive definite matrix, shared by both families, factored
once per design.

Formulation: magnetic charges. The cell's volume charge ``-div J = -(a - m b) cos(m phi) / r`` is
uniform in the meridian area measure ``dr dz``; its face charges ``J . n = (a n_r + c n_z) cos(m
phi)`` (``e_phi`` is tangent to every face) sit on the faces with the measure ``r dl``. The cell
demagnetizing operator in Galerkin form (Newell, Williams and Dunlop, J. Geophys. Res. 98 (1993)
9551, extended to Fourier modes) is

    ``D_ij = -int phi_i . mu0 H(phi_j) dV = (1 / 4 pi) int int q_i q_j / |x - x'| dV dV'
           = (1/4) int int rho_i rho_j g_m dmu dmu'``,

``g_m`` the ``m``-th Fourier coefficient of the Coulomb kernel (:mod:`fields.physics.iron_toroidal`),
``rho`` the meridian charge densities above. The charge form keeps every unknown's field a
scalar kernel (the Amperian form would carry volume currents in r and z for m >= 1), and the
same kernel with its gradient gives the field at observers. ``D`` is a Gram matrix of the
Coulomb energy, so it is symmetric positive semi-definite; with the mass ``int phi_i . phi_i dV
= V_i / 2`` the linear system is ``A = diag(V / (2 chi)) + D``, ``A J = b``,
``b_i = int B_applied . phi_i dV``.

Right-hand sides of a field sampled on a uniform azimuthal rule come from its discrete Fourier
coefficients (spectrally accurate for the smooth field of sources outside the cores; Trefethen
and Weideman, SIAM Rev. 56 (2014) 385). Saturation: harmonics are solved linearized about the
axisymmetric saturated state (the local inverse differential tensor ``dh/dJ`` of
:func:`fields.physics.bh.field_and_inverse_tensor` at the ``m = 0`` polarization): exact for
small harmonics, approximate when the harmonics themselves drive a cell into saturation.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import linalg

from fields.errors import InputError
from fields.physics.bh import field_and_inverse_tensor
from fields.physics.iron import IronModel
from fields.physics.iron_toroidal import (
    fan_rule,
    gauss01,
    quad_rule,
    ring_kernel,
    ring_kernel_gradient,
    segment_rule,
    split_segment_rule,
)

#: default highest harmonic
DEFAULT_HARMONICS = 4
#: pairs whose bounding circles are closer than NEAR_RATIO (MID_RATIO) times the larger radius use
#: the singular rule (the mid order); farther pairs the far order
NEAR_RATIO = 1.0
MID_RATIO = 4.0
#: Gauss orders: far and mid tensor rules, outer rule and fan/split rule of near pairs
FAR_ORDER = 3
MID_ORDER = 5
NEAR_OUTER = 7
NEAR_INNER = 7
#: outer rule of near pairs graded toward the element's ends (the inner integral has log kinks there)
NEAR_GRADED = True
#: Gauss order per cell side (and angles per harmonic) of the right-hand-side volume rule
RHS_ORDER = 4
RHS_MIN_ANGLES = 24
#: Gauss order of the source rule for the field at observers (cells: squared)
FIELD_ORDER = 3
#: observers closer to the axis than this fraction of the mesh's largest radius are moved onto
#: it by this much (the field is regular there; the kernel's gradient is not defined on the axis)
AXIS_CLAMP = 1e-9


# --------------------------------------------------------------------------- elements


@dataclass(frozen=True)
class _Elements:
    """Meridian charge elements: the cells (area measure) then the faces (``r dl``)."""

    polys: np.ndarray  # (c, 4, 2)
    s0: np.ndarray  # (e, 2)
    s1: np.ndarray
    centre: np.ndarray  # (E, 2)
    radius: np.ndarray  # (E,)

    @property
    def cells(self) -> int:
        return self.polys.shape[0]

    @property
    def count(self) -> int:
        return self.centre.shape[0]


def _elements(model: IronModel) -> _Elements:
    m = model.mesh
    P = m.vertices_m[m.cells]
    s0, s1 = m.edges.start_m, m.edges.end_m
    cc = P.mean(axis=1)
    rc = np.max(np.linalg.norm(P - cc[:, None, :], axis=-1), axis=1)
    fc = 0.5 * (s0 + s1)
    rf = 0.5 * np.linalg.norm(s1 - s0, axis=1)
    return _Elements(P, s0, s1, np.concatenate((cc, fc)), np.concatenate((rc, rf)))


def _element_rule(el: _Elements, idx: np.ndarray, n: int, graded: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Points (len(idx), g, 2) and weights of elements idx, all of one kind (cells or faces)."""
    c = el.cells
    if np.all(idx < c):
        return quad_rule(el.polys[idx], n, graded)
    return segment_rule(el.s0[idx - c], el.s1[idx - c], n, graded)


def charge_matrix(model: IronModel, m: int) -> np.ndarray:
    """Meridian charge densities (E, 3c) of the cos-family unknowns ``(a, b, c)`` per cell.

    Cells (first c rows): ``-(a - m b)`` per unit ``dr dz``; faces: ``a n_r + c n_z`` per unit
    ``r dl``, summed over the cells on either side (outward normals).
    """
    mesh = model.mesh
    c = model.cells
    C = mesh.incidence  # mu0 K_phi = J_z n_r - J_r n_z:  C[e, 2i] = -n_z, C[e, 2i + 1] = n_r
    e = C.shape[0]
    Q = np.zeros((c + e, 3 * c))
    i = np.arange(c)
    Q[i, 3 * i] = -1.0
    Q[i, 3 * i + 1] = float(m)
    Q[c:, 0::3] = C[:, 1::2]
    Q[c:, 2::3] = -C[:, 0::2]
    return Q


def _pair_classes(el: _Elements):
    E = el.count
    d = np.linalg.norm(el.centre[:, None, :] - el.centre[None, :, :], axis=-1)
    gap = d - el.radius[:, None] - el.radius[None, :]
    big = np.maximum(el.radius[:, None], el.radius[None, :])
    near = gap < NEAR_RATIO * big
    mid = ~near & (gap < MID_RATIO * big)
    iu = np.triu(np.ones((E, E), dtype=bool))
    return near, mid & iu, ~near & ~mid & iu


def element_kernel_matrices(model: IronModel, mmax: int) -> np.ndarray:
    """``K_ab = int_a int_b g_m dmu dmu'`` (mmax+1, E, E) over all element pairs, m = 0..mmax."""
    el = _elements(model)
    E, c = el.count, el.cells
    K = np.zeros((mmax + 1, E, E))
    near, mid, far = _pair_classes(el)
    kinds = (np.arange(c), np.arange(c, E))
    # tensor rules for mid and far pairs, block by element kind
    for mask, order in ((far, FAR_ORDER), (mid, MID_ORDER)):
        rules = [_element_rule(el, k, order) for k in kinds]
        for ia, ka in enumerate(kinds):
            pa, wa = rules[ia]
            for ib, kb in enumerate(kinds):
                pb, wb = rules[ib]
                sub = mask[np.ix_(ka, kb)]
                I, J = np.nonzero(sub)
                for s in range(0, I.size, 4000):
                    i, j = I[s:s + 4000], J[s:s + 4000]
                    g = ring_kernel(pa[i][:, :, None, 0], pa[i][:, :, None, 1], pb[j][:, None, :, 0],
                                    pb[j][:, None, :, 1], mmax)
                    K[:, ka[i], kb[j]] = np.einsum("mpab,pa,pb->mp", g, wa[i], wb[j])
    # near pairs (both orders): outer Gauss rule, inner rule around each outer point
    outer = [_element_rule(el, k, NEAR_OUTER, NEAR_GRADED) for k in kinds]
    for b in range(E):
        A = np.nonzero(near[:, b])[0]
        for ka_i, ka in enumerate(kinds):
            a = A[np.isin(A, ka)]
            if a.size == 0:
                continue
            pa, wa = outer[ka_i]
            loc = a - (0 if ka_i == 0 else c)
            X = pa[loc].reshape(-1, 2)
            W = wa[loc].reshape(-1)
            if b < c:
                Y, Wy = fan_rule(X, el.polys[b], NEAR_INNER)
            else:
                Y, Wy = split_segment_rule(X, el.s0[b - c], el.s1[b - c], NEAR_INNER)
            g = ring_kernel(X[:, None, 0], X[:, None, 1], Y[..., 0], Y[..., 1], mmax)
            inner = np.einsum("mpy,py->mp", g, Wy) * W[None]
            K[:, a, b] = inner.reshape(mmax + 1, a.size, -1).sum(axis=-1)
    # mirror the tensor-rule triangle; near pairs were done in both orders: average them
    upper = mid | far
    T = np.where(upper[None], K, 0.0)
    T = T + np.swapaxes(np.where((upper & ~np.eye(E, dtype=bool))[None], K, 0.0), 1, 2)
    N = np.where(near[None], K, 0.0)
    return T + 0.5 * (N + np.swapaxes(N, 1, 2))
