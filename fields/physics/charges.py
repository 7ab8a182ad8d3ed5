"""Surface-charge quadrature of uniformly polarized magnets.

For a uniformly polarized floater magnet in an external field ``B_ext`` with no sources inside
it, the force is ``F = oint sigma B_ext dA`` with ``sigma = M . n = J . n / mu0`` and the torque
about a point ``c`` is ``T = oint (x - c) x sigma B_ext dA``, which already contains ``m x B``
(the equivalent-charge model of magnetized bodies: Furlani, Permanent Magnet and
Electromechanical Devices, Academic Press 2001). Only faces with
``J . n != 0`` carry charge. The rules of :mod:`fields.physics.surface_rules` discretise them:

- discs and annuli (cylinder and ring caps): polar Gauss x trapezoid rule;
- cylinder sides (transverse polarization): Gauss-Legendre in z, trapezoid in angle;
- cuboid faces: tensor Gauss-Legendre;
- sphere: Gauss-Legendre in ``cos theta``, trapezoid in angle (it converges spectrally like the
  other rules, needs no finite-difference step and gives the torque by the same formula);
- mesh faces: the Dunavant degree-5 triangle rule on faces subdivided ``4^sub`` times.
"""

from __future__ import annotations

import numpy as np
from scipy.constants import mu_0

from fields.model.design import Floater, Magnet, rotation_matrix
from fields.physics.checks import input_error
from fields.physics.levels import RuleLevel, rule_level
from fields.physics.quadrature import gauss_legendre
from fields.physics.surface_rules import disc_rule, dunavant5, side_rule, subdivide_triangles


def magnet_surface_rule(magnet: Magnet, level: str | RuleLevel = "standard", axisymmetric: bool = False,
                        caps: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Charge quadrature of one magnet in its own frame.

    Parameters
    ----------
    magnet : Magnet
    level : str or RuleLevel
        A name of :data:`fields.physics.levels.LEVELS`, or a level.
    axisymmetric : bool
        One angular node (``phi = 0``) carrying the whole ``2 pi`` weight (cylinder/ring caps,
        axial polarization only): the 1-D radial rule for on-axis poses.
    caps : bool
        Include the caps of cylinders and rings (False: the graded near-field rule supplies them).

    Returns
    -------
    points_m : ndarray, shape (q, 3)
        Nodes, own frame (m).
    charges_Am : ndarray, shape (q,)
        ``sigma dA = (J . n / mu0) w`` (A m): the force is ``sum charges * B``.
    """
    L = rule_level(level, "magnet_surface_rule")
    J = np.asarray(magnet.polarization_T, dtype=float)
    d = magnet.dimensions_m
    xs, qs = [], []

    def add(x, n, w):
        s = (n @ J) * w / mu_0
        keep = s != 0.0
        xs.append(x[keep])
        qs.append(s[keep])

    if magnet.shape in ("cylinder", "ring"):
        ri = 0.0 if magnet.shape == "cylinder" else d[0] / 2
        ro, h = d[-2] / 2, d[-1]
        if axisymmetric:
            r, wr = gauss_legendre(L.nr, ri, ro)
            xy, w = np.stack((r, np.zeros_like(r)), axis=-1), 2 * np.pi * r * wr
        else:
            xy, w = disc_rule(ri, ro, L.nr, L.na)
        for sgn in (1.0, -1.0) if caps else ():
            if J[2] != 0.0:
                x = np.column_stack((xy, np.full(len(w), sgn * h / 2)))
                add(x, np.tile([0.0, 0.0, sgn], (len(w), 1)), w)
        if (J[0] != 0.0 or J[1] != 0.0) and not axisymmetric:
            x, n, w = side_rule(ro, h, L.nz, L.na)
            add(x, n, w)
            if ri > 0.0:
                x, n, w = side_rule(ri, h, L.nz, L.na)
                add(x, -n, w)
    elif magnet.shape == "cuboid":
        half = np.asarray(d, dtype=float) / 2
        for ax in range(3):
            o1, o2 = [i for i in range(3) if i != ax]
            u, wu = gauss_legendre(L.nz, -half[o1], half[o1])
            v, wv = gauss_legendre(L.nz, -half[o2], half[o2])
            U, V = np.meshgrid(u, v, indexing="ij")
            W = (wu[:, None] * wv[None, :]).reshape(-1)
            for sgn in (1.0, -1.0):
                x = np.zeros((W.size, 3))
                x[:, o1], x[:, o2], x[:, ax] = U.reshape(-1), V.reshape(-1), sgn * half[ax]
                n = np.zeros((W.size, 3))
                n[:, ax] = sgn
                add(x, n, W)
    elif magnet.shape == "sphere":
        R = d[0] / 2
        ct, wt = gauss_legendre(L.nr + 4, -1.0, 1.0)
        phi = 2 * np.pi * (np.arange(L.na) + 0.5) / L.na
        CT, P = np.meshgrid(ct, phi, indexing="ij")
        st = np.sqrt(1 - CT**2)
        n = np.stack((st * np.cos(P), st * np.sin(P), CT), axis=-1).reshape(-1, 3)
        W = (wt[:, None] * np.full(L.na, 2 * np.pi / L.na)[None, :]).reshape(-1) * R * R
        add(n * R, n, W)
    elif magnet.shape == "mesh":
        tri = np.asarray(magnet.mesh_vertices_m, dtype=float)[np.asarray(magnet.mesh_faces)]
        for _ in range(L.sub):
            tri = subdivide_triangles(tri)
        bary, wb = dunavant5()
        cr = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
        area = 0.5 * np.linalg.norm(cr, axis=1)
        n = cr / (2 * area[:, None])
        x = np.einsum("pj,tjc->tpc", bary, tri).reshape(-1, 3)
        add(x, np.repeat(n, len(wb), axis=0), (area[:, None] * wb[None, :]).reshape(-1))
    else:
        raise input_error(f"magnet {magnet.name}", "shape", "one of cylinder, ring, cuboid, sphere, mesh", magnet.shape)
    if not xs:
        return np.zeros((0, 3)), np.zeros(0)
    return np.concatenate(xs), np.concatenate(qs)


def floater_surface_rule(floater: Floater, level: str | RuleLevel = "standard",
                         axisymmetric: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Charge quadrature of all floater magnets: points (q, 3) in the floater frame (m) and
    charges (q,) (A m); see :func:`magnet_surface_rule`."""
    xs, qs = [], []
    for m in floater.magnets:
        x, s = magnet_surface_rule(m, level, axisymmetric)
        xs.append(x @ rotation_matrix(m.rotvec_rad).T + np.asarray(m.position_m, dtype=float))
        qs.append(s)
    return np.concatenate(xs), np.concatenate(qs)
