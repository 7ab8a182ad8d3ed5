"""Axisymmetric magnetostatic finite elements in the (r, z) half-plane (scikit-fem).

Unknown: the azimuthal vector potential ``A = A_phi(r, z)``, ``B = curl(A e_phi)``, so
``B_r = -dA/dz`` and ``B_z = dA/dr + A/r``. The weak form, for every test function ``v``
vanishing on the boundary, is

    int H(B(A)) . curl v  2 pi r dr dz  =  int J v 2 pi r dr dz  +  int M . curl v 2 pi r dr dz,

with ``curl v = (-dv/dz, dv/dr + v/r)``, ``H = B / mu0`` in air, coils and magnets, and the
Frohlich-Kennelly law in soft iron (:mod:`.material`). ``A_phi`` was chosen over the flux
function ``u = r A_phi`` because its energy has the benign weight ``r`` (the ``u`` form carries
``1/r`` and needs ``u = O(r^2)`` at the axis); on the axis ``A_phi = 0`` exactly by symmetry, so
the axis is a homogeneous Dirichlet boundary, and every quadrature point lies off the axis, where
``v/r`` is bounded (``v`` vanishes on the axis). Finite elements for this weighted problem converge
at the usual rates (B. Mercier and G. Raugel, RAIRO Anal. Numer. 16 (1982) 405). Elements:
quadratic Lagrange triangles (``ElementTriP2``), 6th-order quadrature.

Sources: a coil of ``N`` turns carries ``J_phi = N I / A_w`` over its winding section ``A_w``;
a permanent magnet is rigid (recoil permeability 1) with ``M = J / mu0`` along z, which enters
only through the ``M . curl v`` term (equivalent to its surface current ``M x n``).

Open boundary: ``A = 0`` on a rectangle ``[0, R] x [z_m - R, z_m + R]`` with ``R`` = 2 m, 25 to
80 times the device size. For ``A = 0`` (a flux-tight wall) the error is the field of image
sources beyond the wall; for the dipolar sources here it decays as ``(L/R)^3`` in the field and
``(L/R)^4`` in the force between two bodies of size ``L``: below 1e-6 at ``R = 2 m``, and the
domain test in the tests confirms it by doubling ``R``.

Nonlinear iron: Newton's method on the full residual with the consistent tangent ``dH/dB``,
from the linear-iron solution (or a given start), with backtracking on the residual norm; it stops
when the update is below ``NEWTON_TOL`` times the solution (max norms). Quadratic convergence then
leaves the solution error at the square of that.

Force on the floater: the Maxwell stress tensor ``T = (B B - |B|^2 I / 2) / mu0`` in air, over a
band around the floater in the weighted-volume form of the closed-surface integral (Coulomb's
virtual work / Arkkio's method; J. L. Coulomb, IEEE Trans. Magn. 19 (1983) 2514;
A. Arkkio, Acta Polytechnica Scandinavica EE 59 (1987)):

    F_z = - int_band (T_zr dw/dr + T_zz dw/dz) 2 pi r dr dz,

where ``w`` is 1 on the floater, 0 outside the band, and the band lies in air. It equals the
surface integral of ``T . n`` on any closed surface in the band for the exact field (Gauss's
theorem with ``div T = 0`` in air) and, being a volume integral, converges like the energy.
Two bands of different width give two independent numbers; their difference is reported.

Flux linkage of coil k: ``psi_k = (N_k / A_w,k) int_winding 2 pi r A dr dz`` (Wb-turns).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import scipy.sparse.linalg as spla
from scipy.constants import mu_0
from skfem import Basis, BilinearForm, ElementTriP2, Functional, LinearForm, MeshTri, MeshTri2, asm

from .material import FrohlichKennelly
from .mesh import graded_nodes, refine_nodes, sphere_map, tensor_triangles

TWO_PI = 2.0 * np.pi
#: Newton stops when max|dA| <= NEWTON_TOL * max|A|
NEWTON_TOL = 1e-10
NEWTON_MAX_IT = 40
INTORDER = 6


# --------------------------------------------------------------------------- case description


@dataclass(frozen=True)
class Rect:
    """Axisymmetric body of section ``r0 <= r <= r1``, ``z0 <= z <= z1`` (m)."""

    r0: float
    r1: float
    z0: float
    z1: float

    def contains(self, r, z):
        return (r >= self.r0) & (r <= self.r1) & (z >= self.z0) & (z <= self.z1)

    def box(self):
        return self.r0, self.r1, self.z0, self.z1


@dataclass(frozen=True)
class Sphere:
    """Sphere on the axis: centre height ``z_centre`` and radius (m)."""

    z_centre: float
    radius: float

    def contains(self, r, z):
        return np.maximum(np.abs(r), np.abs(z - self.z_centre)) <= self.radius  # reference coords

    def box(self):
        return 0.0, self.radius, self.z_centre - self.radius, self.z_centre + self.radius


@dataclass(frozen=True)
class CoilBody:
    shape: Rect
    turns: float

    @property
    def area_m2(self) -> float:
        s = self.shape
        return (s.r1 - s.r0) * (s.z1 - s.z0)


@dataclass(frozen=True)
class MagnetBody:
    shape: Rect
    Jz_T: float


@dataclass(frozen=True)
class IronBody:
    shape: Rect | Sphere
    material: FrohlichKennelly


@dataclass(frozen=True)
class Case:
    """Bodies of one axisymmetric problem; ``floater`` indexes the body the force acts on,
    as ``("magnet", i)`` or ``("iron", i)``."""

    coils: tuple[CoilBody, ...]
    magnets: tuple[MagnetBody, ...]
    irons: tuple[IronBody, ...]
    floater: tuple[str, int]

    def bodies(self):
        return [("coil", i, c.shape) for i, c in enumerate(self.coils)] + \
               [("magnet", i, m.shape) for i, m in enumerate(self.magnets)] + \
               [("iron", i, b.shape) for i, b in enumerate(self.irons)]

    def floater_shape(self):
        kind, i = self.floater
        return (self.magnets if kind == "magnet" else self.irons)[i].shape

    def with_material(self, material: FrohlichKennelly, which: tuple[int, ...] | None = None) -> "Case":
        irons = tuple(IronBody(b.shape, material) if which is None or i in which else b
                      for i, b in enumerate(self.irons))
        return Case(self.coils, self.magnets, irons, self.floater)


@dataclass(frozen=True)
class MeshSpec:
    """Level-0 mesh parameters (m); level ``L`` splits every interval into ``2^L``."""

    h_min: float = 1.0e-4
    growth: float = 0.3
    h_max: float = 1.5e-3
    far_ratio: float = 0.35
    domain_m: float = 2.0
    #: body edges (and the graded device box) only count within this of the floater (m)
    near_m: float = 0.2
    #: optional extra node lines at r = d and z = z_m +- d (m): a larger domain with these lines
    #: has the same nodes inside d as the domain of size d, so the two differ by truncation only
    inner_domain_m: float | None = None


def _box_gap(a, b) -> float:
    """Chebyshev (max-norm) clearance between two boxes (r0, r1, z0, z1)."""
    dr = max(a[0] - b[1], b[0] - a[1], 0.0)
    dz = max(a[2] - b[3], b[2] - a[3], 0.0)
    return max(dr, dz)


# --------------------------------------------------------------------------- forms


def _curl(v, r):
    return -v.grad[1], v.grad[0] + np.asarray(v) / r


@BilinearForm
def _stiffness(u, v, w):
    r = w.x[0]
    ur, uz = _curl(u, r)
    vr, vz = _curl(v, r)
    return TWO_PI * r * np.asarray(w["nu"]) * (ur * vr + uz * vz)


@BilinearForm
def _tangent(u, v, w):
    r = w.x[0]
    ur, uz = _curl(u, r)
    vr, vz = _curl(v, r)
    return TWO_PI * r * (np.asarray(w["nrr"]) * ur * vr + np.asarray(w["nrz"]) * (ur * vz + uz * vr)
                         + np.asarray(w["nzz"]) * uz * vz)


@LinearForm
def _field_load(v, w):
    r = w.x[0]
    vr, vz = _curl(v, r)
    return TWO_PI * r * (np.asarray(w["Hr"]) * vr + np.asarray(w["Hz"]) * vz)


@LinearForm
def _current_load(v, w):
    return TWO_PI * w.x[0] * np.asarray(v)


@LinearForm
def _axial_magnetization_load(v, w):
    r = w.x[0]
    return TWO_PI * r * (v.grad[0] + np.asarray(v) / r)


@Functional
def _stress_force(w):
    r = w.x[0]
    A = w["A"]
    Br = -A.grad[1]
    Bz = A.grad[0] + np.asarray(A) / r
    wr, wz = w["wt"].grad
    Trz = Br * Bz / mu_0
    Tzz = 0.5 * (Bz * Bz - Br * Br) / mu_0
    return -TWO_PI * r * (Trz * wr + Tzz * wz)


@Functional
def _weighted_potential(w):
    return TWO_PI * w.x[0] * np.asarray(w["A"])


# --------------------------------------------------------------------------- the model


@dataclass(frozen=True)
class Solution:
    """A solved potential with the diagnostics of its Newton run."""

    A: np.ndarray
    newton_iterations: int
    update_history: tuple[float, ...] = field(default_factory=tuple)


class Model:
    """Mesh, bases and linear operators of one case at one mesh level."""

    def __init__(self, case: Case, level: int = 1, spec: MeshSpec = MeshSpec(), band_fractions=(0.5, 0.25)):
        self.case = case
        self.level = level
        self.spec = spec
        bodies = case.bodies()
        fl = case.floater_shape()
        fbox = fl.box()
        others = [s.box() for k, i, s in bodies if s is not fl]
        clearance = min(_box_gap(fbox, b) for b in others) if others else 0.05
        size = max(fbox[1] - fbox[0], fbox[3] - fbox[2])
        self.band_widths_m = tuple(min(f * clearance, f * size) for f in band_fractions)
        sphere = fl if isinstance(fl, Sphere) else None
        # edges and the device box only count within spec.near_m of the floater (a slab standing
        # for a half space reaches the domain boundary: its far edges need no grading)
        nm = spec.near_m
        near = (fbox[0] - nm, fbox[1] + nm, fbox[2] - nm, fbox[3] + nm)
        r_ref, z_ref, keep_r, keep_z = [], [], [], []
        boxes = []
        for kind, i, s in bodies:
            b = s.box()
            boxes.append((max(b[0], near[0]), min(b[1], near[1]), max(b[2], near[2]), min(b[3], near[3])))
            if isinstance(s, Sphere):
                continue
            r_ref += [x for x in (s.r0, s.r1) if 0 < x < near[1]]
            z_ref += [x for x in (s.z0, s.z1) if near[2] < x < near[3]]
        boxes = np.array(boxes)
        dev_r = (0.0, float(boxes[:, 1].max()))
        dev_z = (float(boxes[:, 2].min()), float(boxes[:, 3].max()))
        if sphere is not None:
            a = sphere.radius
            self.blend_outer_m = a + min(0.75 * clearance, a)
            b = self.blend_outer_m
            zc = sphere.z_centre
            keep_r += [a, b]
            keep_z += [zc - b, zc - a, zc, zc + a, zc + b]
            self.band_widths_m = (b - a,)
        else:
            for d in self.band_widths_m:
                keep_r.append(fbox[1] + d)
                keep_z += [fbox[2] - d, fbox[3] + d]
        R = spec.domain_m
        zmid = 0.5 * (dev_z[0] + dev_z[1])
        if spec.inner_domain_m is not None:
            keep_r.append(spec.inner_domain_m)
            keep_z += [zmid - spec.inner_domain_m, zmid + spec.inner_domain_m]
        kw = dict(h_min=spec.h_min, growth=spec.growth, h_max=spec.h_max, far_ratio=spec.far_ratio)
        rn = graded_nodes(0.0, R, r_ref, keep_r, device=dev_r, **kw)
        zn = graded_nodes(zmid - R, zmid + R, z_ref, keep_z, device=dev_z, **kw)
        self.r_nodes, self.z_nodes = refine_nodes(rn, level), refine_nodes(zn, level)
        zc_split = sphere.z_centre if sphere is not None else 0.5 * (fbox[2] + fbox[3])
        p, t = tensor_triangles(self.r_nodes, self.z_nodes, zc_split)
        m1 = MeshTri(p, t)
        if sphere is not None:
            m2 = MeshTri2.from_mesh(m1)
            ref = m2.doflocs.copy()
            from dataclasses import replace
            mesh = replace(m2, doflocs=sphere_map(ref, sphere.z_centre, sphere.radius, self.blend_outer_m))
        else:
            mesh = m1
            ref = None
        self.mesh = mesh
        elem = ElementTriP2()
        self.basis = Basis(mesh, elem, intorder=INTORDER)
        self.ndofs = self.basis.N
        ref_dofs = ref if ref is not None else self.basis.doflocs
        # element labels by the reference-frame centroid
        cen = p[:, t].mean(axis=1)
        label = np.full(t.shape[1], -1)
        self._body_elems = {}
        for j, (kind, i, s) in enumerate(bodies):
            inside = s.contains(cen[0], cen[1])
            label[inside] = j
            self._body_elems[(kind, i)] = np.flatnonzero(inside)
        self.label = label
        sub = lambda idx: Basis(mesh, elem, intorder=INTORDER, elements=idx)  # noqa: E731
        iron_mask = np.zeros(t.shape[1], dtype=bool)
        for i in range(len(case.irons)):
            iron_mask[self._body_elems[("iron", i)]] = True
        self._iron_bases = [sub(self._body_elems[("iron", i)]) for i in range(len(case.irons))]
        lin = sub(np.flatnonzero(~iron_mask))
        self.K0 = asm(_stiffness, lin, nu=np.full(lin.global_coordinates()[0].shape, 1.0 / mu_0))
        self._coil_bases = [sub(self._body_elems[("coil", i)]) for i in range(len(case.coils))]
        self.f_coil_per_A = [asm(_current_load, cb) * (c.turns / c.area_m2)
                             for cb, c in zip(self._coil_bases, case.coils)]
        f_mag = np.zeros(self.ndofs)
        for i, m in enumerate(case.magnets):
            f_mag += asm(_axial_magnetization_load, sub(self._body_elems[("magnet", i)])) * (m.Jz_T / mu_0)
        self.f_magnets = f_mag
        self.free = self.basis.complement_dofs(self.basis.get_dofs())
        # force weights (nodal interpolants of a ramp in reference coordinates)
        self._bands = []
        for d in self.band_widths_m:
            if sphere is not None:
                rho, zeta = ref_dofs[0], ref_dofs[1] - sphere.z_centre
                s = np.maximum(np.abs(rho), np.abs(zeta))
                wt = np.clip(1.0 - (s - sphere.radius) / d, 0.0, 1.0)
            else:
                ex = np.maximum.reduce([ref_dofs[0] - fbox[1], fbox[0] - ref_dofs[0],
                                        fbox[2] - ref_dofs[1], ref_dofs[1] - fbox[3]])
                wt = np.clip(1.0 - np.maximum(ex, 0.0) / d, 0.0, 1.0)
            wt = np.where(wt > 1.0 - 1e-9, 1.0, np.where(wt < 1e-9, 0.0, wt))  # rounding at the edges
            el_w = wt[self.basis.element_dofs]  # (6, t)
            active = np.flatnonzero(el_w.max(axis=0) - el_w.min(axis=0) > 0)
            if np.any(label[active] >= 0):
                raise ValueError("force band reaches a body: band width %.3g m too large" % d)
            self._bands.append((sub(active), wt))
        self._lin_lu = None

    # ---------------------------------------------------------------- assembly helpers

    def _iron_terms(self, A, tangent: bool = True):
        load = np.zeros(self.ndofs)
        K = None
        for ib, body in zip(self._iron_bases, self.case.irons):
            Af = ib.interpolate(A)
            r = ib.global_coordinates()[0]
            Br = -Af.grad[1]
            Bz = Af.grad[0] + np.asarray(Af) / r
            Hr, Hz, nrr, nrz, nzz = body.material.field_and_tangent(Br, Bz)
            load += asm(_field_load, ib, Hr=Hr, Hz=Hz)
            if tangent:
                Ki = asm(_tangent, ib, nrr=nrr, nrz=nrz, nzz=nzz)
                K = Ki if K is None else K + Ki
        return load, K

    def _linear_matrix(self):
        K = self.K0.copy()
        for ib, body in zip(self._iron_bases, self.case.irons):
            shape = ib.global_coordinates()[0].shape
            K = K + asm(_stiffness, ib, nu=np.full(shape, 1.0 / (mu_0 * body.material.mu_r)))
        return K

    def _solve(self, K, rhs):
        A = np.zeros(self.ndofs)
        I = self.free
        A[I] = spla.splu(K[I][:, I].tocsc(), permc_spec="MMD_AT_PLUS_A").solve(rhs[I])
        return A

    def source_vector(self, currents_A) -> np.ndarray:
        f = self.f_magnets.copy()
        for I, fc in zip(np.atleast_1d(currents_A), self.f_coil_per_A):
            f += I * fc
        return f

    # ---------------------------------------------------------------- solves

    def linear_parts(self) -> tuple[np.ndarray, list[np.ndarray]]:
        """Linear-iron (``mu_r`` only) potentials of the magnets and of each coil at 1 A."""
        I = self.free
        lu = spla.splu(self._linear_matrix()[I][:, I].tocsc(), permc_spec="MMD_AT_PLUS_A")
        out = []
        for f in [self.f_magnets] + list(self.f_coil_per_A):
            A = np.zeros(self.ndofs)
            if np.any(f[I]):
                A[I] = lu.solve(f[I])
            out.append(A)
        return out[0], out[1:]

    def solve(self, currents_A, start: np.ndarray | None = None) -> Solution:
        """Nonlinear (Frohlich-Kennelly) solve by Newton's method."""
        f = self.source_vector(currents_A)
        if start is None:
            A = self._solve(self._linear_matrix(), f)
        else:
            A = start.copy()
        if all(b.material.linear for b in self.case.irons):
            return Solution(A, 0)
        I = self.free
        hist = []

        def residual(Ax):
            load, _ = self._iron_terms(Ax, tangent=False)
            return (self.K0 @ Ax + load - f)[I]

        for it in range(1, NEWTON_MAX_IT + 1):
            load, Kt = self._iron_terms(A)
            res = (self.K0 @ A + load - f)[I]
            J = (self.K0 + Kt)[I][:, I].tocsc()
            dA = np.zeros(self.ndofs)
            dA[I] = -spla.splu(J, permc_spec="MMD_AT_PLUS_A").solve(res)
            r0 = np.linalg.norm(res)
            alpha = 1.0
            for _ in range(12):
                if np.linalg.norm(residual(A + alpha * dA)) < r0 or alpha < 1e-3:
                    break
                alpha *= 0.5
            A = A + alpha * dA
            upd = alpha * np.abs(dA).max() / max(np.abs(A).max(), 1e-300)
            hist.append(float(upd))
            if upd <= NEWTON_TOL:
                return Solution(A, it, tuple(hist))
        raise RuntimeError(f"Newton did not converge in {NEWTON_MAX_IT} iterations; updates {hist[-3:]}")

    # ---------------------------------------------------------------- outputs

    def forces_N(self, A) -> tuple[float, ...]:
        """Axial force (N, +z) on the floater from each force band."""
        return tuple(float(_stress_force.assemble(bb, A=bb.interpolate(A), wt=bb.interpolate(wt)))
                     for bb, wt in self._bands)

    def flux_linkages_Wb(self, A) -> tuple[float, ...]:
        """Flux linkage of each coil (Wb-turns)."""
        return tuple(float(_weighted_potential.assemble(cb, A=cb.interpolate(A))) * c.turns / c.area_m2
                     for cb, c in zip(self._coil_bases, self.case.coils))
