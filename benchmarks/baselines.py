"""Direct routes a practitioner would write with magpylib/numpy/scipy only, with accuracy knobs.

Both return the force (N) on the floater and the torque (N m) about its centre of mass at n
poses, so they compare one to one with ``fields.physics.wrench``. Iron-free designs only (coils
and floater magnets; fixed magnets are not modelled here).

- :func:`naive_route`: the coil as ``nr x nz`` circular loops on a midpoint grid of the winding
  cross-section (a magpylib Collection) and ``magpylib.getFT`` with ``meshing`` cells in the
  floater magnet. The historical baseline (10 x 30 loops, meshing (8, 3, 3)).
- :func:`tuned_route`: the coil as ``nr x nz`` loops at Gauss-Legendre nodes over the winding
  cross-section (radial x axial, weights = current share), the force on those loops in the
  magnet's closed-form field (``magpylib`` ``getB`` of the magnet at ``segments`` equispaced
  points on each loop; Lorentz force dF = I dl x B with the exact tangent, i.e. the trapezoid rule
  on the circle, which converges geometrically for a smooth periodic integrand), negated by
  Newton's third law; the torque likewise (r x dF about the floater's centre of mass, negated:
  for closed circuits and magnets the mutual torques about any common point cancel).
- :func:`axial_force_charge_model`: an independent closed form for coaxial, untilted poses: the
  charge model of the axially magnetised cylinder (sigma = +-J/mu0 on its end faces; Furlani,
  "Permanent Magnet and Electromechanical Devices", Academic Press 2001, ch. 2-3, from memory)
  gives F_z = (J/mu0) * I * sum_loops [M(R, a, z_top) - M(R, a, z_bottom)], M the mutual
  inductance of two coaxial circles by Maxwell's elliptic-integral formula (Smythe, "Static and
  Dynamic Electricity", 3rd ed. 1968; from memory), integrated over the winding
  cross-section by Gauss-Legendre.
"""

from __future__ import annotations

import numpy as np
from scipy.constants import mu_0
from scipy.spatial.transform import Rotation

#: field evaluations (observer x pose) per getB call: keeps the arrays near 100 MB
_EVALS_PER_CALL = 2_000_000


def _magpy_magnet(m, positions, orientations):
    import magpylib as magpy

    if m.shape == "cylinder":
        return magpy.magnet.Cylinder(dimension=m.dimensions_m, polarization=m.polarization_T,
                                     position=positions, orientation=orientations)
    if m.shape == "ring":
        ri, ro, h = m.dimensions_m[0] / 2, m.dimensions_m[1] / 2, m.dimensions_m[2]
        return magpy.magnet.CylinderSegment(dimension=(ri, ro, h, 0, 360), polarization=m.polarization_T,
                                            position=positions, orientation=orientations)
    if m.shape == "cuboid":
        return magpy.magnet.Cuboid(dimension=m.dimensions_m, polarization=m.polarization_T,
                                   position=positions, orientation=orientations)
    if m.shape == "sphere":
        return magpy.magnet.Sphere(diameter=m.dimensions_m[0], polarization=m.polarization_T,
                                   position=positions, orientation=orientations)
    raise ValueError(f"baselines: magnet shape {m.shape!r} is not covered by the direct routes")


def _magnet_poses(design, P, R):
    """World centres (n, 3) and orientations (Rotation of n) of each floater magnet."""
    Rf = Rotation.from_rotvec(np.atleast_2d(R))
    out = []
    for m in design.floater.magnets:
        c = P + Rf.apply(np.asarray(m.position_m, float))
        out.append((m, c, Rf * Rotation.from_rotvec(np.asarray(m.rotvec_rad, float))))
    return out


def _com(design, P, R):
    return P + Rotation.from_rotvec(np.atleast_2d(R)).apply(np.asarray(design.floater.centre_of_mass_m, float))


def _check(design):
    if design.cores or design.magnets:
        raise ValueError("baselines: iron-free designs without fixed magnets only")


def naive_route(design, P, R, currents_A, loops=(10, 30), meshing=(8, 3, 3), chunk=40):
    """Midpoint grid of ``loops`` circular loops per coil and ``magpylib.getFT`` with ``meshing``."""
    import magpylib as magpy

    _check(design)
    P, R = np.atleast_2d(P).astype(float), np.atleast_2d(R).astype(float)
    nr, nz = loops
    members = []
    for c, I in zip(design.coils, np.atleast_1d(currents_A)):
        r = c.inner_radius_m + (np.arange(nr) + 0.5) * (c.outer_radius_m - c.inner_radius_m) / nr
        z = -c.height_m / 2 + (np.arange(nz) + 0.5) * c.height_m / nz
        rot = Rotation.from_rotvec(c.rotvec_rad)
        I_loop = float(I) * c.turns / (nr * nz)
        for ri in r:
            for zi in z:
                members.append(magpy.current.Circle(current=I_loop, diameter=2 * ri,
                                                    position=np.asarray(c.position_m) + rot.apply([0, 0, zi]),
                                                    orientation=rot))
    coil = magpy.Collection(*members)
    com = _com(design, P, R)
    F = np.zeros((len(P), 3))
    T = np.zeros((len(P), 3))
    for m, cen, ori in _magnet_poses(design, P, R):
        for a in range(0, len(P), chunk):
            sl = slice(a, a + chunk)
            tgt = _magpy_magnet(m, cen[sl], ori[sl])
            f, t = magpy.getFT(coil, tgt, meshing=meshing)
            f, t = np.reshape(f, (-1, 3)), np.reshape(t, (-1, 3))
            F[sl] += f
            T[sl] += t + np.cross(cen[sl] - com[sl], f)  # getFT's torque is about the magnet centre
    return F, T


def loop_elements(design, currents_A, loops=(4, 8), segments=64):
    """Current elements of the Gauss-Legendre loop model: points X (M, 3) and I dl (M, 3), world."""
    nr, nz = loops
    xr, wr = np.polynomial.legendre.leggauss(nr)
    xz, wz = np.polynomial.legendre.leggauss(nz)
    phi = 2 * np.pi * np.arange(segments) / segments
    X, IdL = [], []
    for c, I in zip(design.coils, np.atleast_1d(currents_A)):
        r = 0.5 * (c.inner_radius_m + c.outer_radius_m) + 0.5 * (c.outer_radius_m - c.inner_radius_m) * xr
        z = 0.5 * c.height_m * xz
        w = np.outer(wr, wz).ravel() / 4.0  # current share of each loop (sums to 1)
        rr, zz = np.repeat(r, nz), np.tile(z, nr)
        cp, sp = np.cos(phi), np.sin(phi)
        pts = np.stack([rr[:, None] * cp, rr[:, None] * sp, np.broadcast_to(zz[:, None], (len(rr), segments))], -1)
        # exact tangent times arc length per node (trapezoid rule on the circle)
        dl = np.stack([-sp, cp, np.zeros_like(cp)], -1)[None] * (rr[:, None, None] * 2 * np.pi / segments)
        idl = float(I) * c.turns * w[:, None, None] * dl
        rot = Rotation.from_rotvec(c.rotvec_rad)
        X.append(rot.apply(pts.reshape(-1, 3)) + np.asarray(c.position_m))
        IdL.append(rot.apply(idl.reshape(-1, 3)))
    return np.concatenate(X), np.concatenate(IdL)


def tuned_route(design, P, R, currents_A, loops=(4, 8), segments=64):
    """Gauss-Legendre loops, Lorentz force in the magnets' closed-form field, Newton's third law."""
    _check(design)
    P, R = np.atleast_2d(P).astype(float), np.atleast_2d(R).astype(float)
    X, IdL = loop_elements(design, currents_A, loops, segments)
    com = _com(design, P, R)
    F = np.zeros((len(P), 3))
    T = np.zeros((len(P), 3))
    step = max(1, _EVALS_PER_CALL // len(X))
    for m, cen, ori in _magnet_poses(design, P, R):
        for a in range(0, len(P), step):
            sl = slice(a, a + step)
            B = np.reshape(_magpy_magnet(m, cen[sl], ori[sl]).getB(X), (-1, len(X), 3))  # (n, M, 3)
            dF = np.cross(IdL[None], B)  # force on the coil elements
            F[sl] -= dF.sum(1)
            # torque on the coil about the floater's centre of mass, negated
            T[sl] -= np.cross(X[None] - com[sl, None], dF).sum(1)
    return F, T


def _mutual_coaxial_H(R1, R2, dz):
    """Mutual inductance (H) of two coaxial circles of radii R1, R2 at axial distance dz (Maxwell)."""
    from scipy.special import ellipe, ellipk

    m = 4 * R1 * R2 / ((R1 + R2) ** 2 + dz ** 2)  # k^2
    k = np.sqrt(m)
    return mu_0 * np.sqrt(R1 * R2) * ((2 / k - k) * ellipk(m) - 2 / k * ellipe(m))


def axial_force_charge_model(design, P, currents_A, order=(40, 80)):
    """F_z (N) on a coaxial, untilted, axially magnetised cylinder floater (charge model)."""
    _check(design)
    (m,) = design.floater.magnets
    if m.shape != "cylinder" or np.any(np.asarray(m.rotvec_rad)) or np.any(np.asarray(m.polarization_T)[:2]):
        raise ValueError("axial_force_charge_model: one axially polarised cylinder only")
    a, h = m.dimensions_m[0] / 2, m.dimensions_m[1]
    J = m.polarization_T[2]
    xr, wr = np.polynomial.legendre.leggauss(order[0])
    xz, wz = np.polynomial.legendre.leggauss(order[1])
    zc = np.atleast_2d(P)[:, 2] + m.position_m[2]
    Fz = np.zeros(len(zc))
    for c, I in zip(design.coils, np.atleast_1d(currents_A)):
        if np.any(np.abs(np.asarray(c.axis)[:2]) > 0) or np.any(np.abs(np.asarray(c.position_m)[:2]) > 0):
            raise ValueError("axial_force_charge_model: coaxial coils along z only")
        r = 0.5 * (c.inner_radius_m + c.outer_radius_m) + 0.5 * (c.outer_radius_m - c.inner_radius_m) * xr
        z = c.position_m[2] + 0.5 * c.height_m * xz
        w = np.outer(wr, wz) / 4.0
        sgn = float(np.sign(c.axis[2]))
        for face, s in ((zc + h / 2, 1.0), (zc - h / 2, -1.0)):
            M = _mutual_coaxial_H(r[None, :, None], a, z[None, None, :] - face[:, None, None])
            Fz += s * J / mu_0 * sgn * float(I) * c.turns * np.einsum("nij,ij->n", M, w)
    return Fz
