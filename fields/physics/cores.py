"""Soft-iron cores as uniformly magnetized bodies (the demagnetizing-factor model).

A core is replaced by a uniformly magnetized body of its own shape with ``M = chi_eff H_mean``
per own axis, ``chi_eff = chi / (1 + N chi)``, ``chi = mu_r - 1`` and ``N`` the magnetometric
demagnetizing factor (:mod:`fields.physics.demag`; Chen, Brug and Goldfarb, IEEE Trans. Magn. 27
(1991) 3601). ``H_mean`` is the applied field (coils, fixed magnets and the floater at its pose)
averaged over the core volume with a Gauss rule. Core-core coupling and the core's non-uniform
self field are ignored (only the demagnetizing factor accounts for self interaction). The
polarization is clipped at the saturation polarization; a clipped core makes the field nonlinear
in the currents. The model is poor when a gap is small compared with the core diameter (the
real magnetization is then far from uniform) and near saturation: it is the one-cell limit of a
cell-based magnetization solve.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from fields.model.design import Core, Design, rotation_matrix
from fields.physics.checks import input_error
from fields.physics.demag import core_demag_factors
from fields.physics.kernels import shape_field_own_T, to_own_frame
from fields.physics.quadrature import gauss_legendre


def core_volume_rule(core: Core, order: int = 8) -> tuple[np.ndarray, np.ndarray]:
    """Volume Gauss rule of a core in its own frame: points (q,3), weights (q,) summing to 1."""
    d = core.dimensions_m
    if core.shape in ("cylinder", "ring"):
        ri = 0.0 if core.shape == "cylinder" else d[0] / 2
        ro, h = d[-2] / 2, d[-1]
        r, wr = gauss_legendre(order, ri, ro)
        z, wz = gauss_legendre(order, -h / 2, h / 2)
        na = 2 * order
        phi = 2 * np.pi * np.arange(na) / na
        R_, P_, Z_ = np.meshgrid(r, phi, z, indexing="ij")
        W = (wr * r)[:, None, None] * np.full(na, 2 * np.pi / na)[None, :, None] * wz[None, None, :]
        pts = np.stack((R_ * np.cos(P_), R_ * np.sin(P_), Z_), axis=-1).reshape(-1, 3)
    elif core.shape == "cuboid":
        axes = [gauss_legendre(order, -e / 2, e / 2) for e in d]
        X, Y, Z = np.meshgrid(axes[0][0], axes[1][0], axes[2][0], indexing="ij")
        W = axes[0][1][:, None, None] * axes[1][1][None, :, None] * axes[2][1][None, None, :]
        pts = np.stack((X, Y, Z), axis=-1).reshape(-1, 3)
    else:
        raise input_error(f"core {core.name}", "shape", "one of cylinder, ring, cuboid", core.shape)
    W = W.reshape(-1)
    return pts, W / W.sum()


@dataclass(frozen=True)
class CoreModel:
    """Precomputed linear maps of one core (all world frame).

    Attributes
    ----------
    core : Core
    R : ndarray, shape (3, 3)
        Rotation own -> world.
    chi_eff : ndarray, shape (3,)
        Effective susceptibility along the core's own axes.
    mean_pts_m : ndarray, shape (qc, 3)
        World Gauss points of the volume mean (m).
    mean_w : ndarray, shape (qc,)
        Their weights (summing to 1).
    """

    core: Core
    R: np.ndarray
    chi_eff: np.ndarray
    mean_pts_m: np.ndarray
    mean_w: np.ndarray

    def susceptibility_world(self) -> np.ndarray:
        """(3,3) map from the mean applied B (T) to the core polarization J (T), world frame."""
        return self.R @ np.diag(self.chi_eff) @ self.R.T

    def field_matrix(self, points_m: np.ndarray) -> np.ndarray:
        """(q,3,3): B at points (world) per unit world polarization of the core."""
        own = to_own_frame(points_m.reshape(-1, 3), self.core.position_m, self.R)
        q = own.shape[0]
        G = np.empty((q, 3, 3))
        for j in range(3):
            Jown = np.zeros(3)
            Jown[j] = 1.0
            G[:, :, j] = shape_field_own_T(self.core.shape, self.core.dimensions_m, Jown, own) @ self.R.T
        # columns are per unit *own-axis* polarization; convert to per unit world polarization
        return G @ self.R.T


def core_models(design: Design, order: int = 8) -> tuple[CoreModel, ...]:
    """Linear models of the design's cores (empty tuple when there are none)."""
    out = []
    for c in design.cores:
        mu_r = float(c.relative_permeability)
        if not np.isfinite(mu_r) or mu_r < 1.0:
            raise input_error(f"core {c.name}", "relative_permeability", ">= 1", mu_r)
        chi = mu_r - 1.0
        N = core_demag_factors(c.shape, c.dimensions_m)
        R = rotation_matrix(c.rotvec_rad)
        pts, w = core_volume_rule(c, order)
        out.append(CoreModel(c, R, chi / (1.0 + N * chi), pts @ R.T + np.asarray(c.position_m, dtype=float), w))
    return tuple(out)


def clip_polarization(J: np.ndarray, Js) -> tuple[np.ndarray, np.ndarray]:
    """Clip polarization vectors (..., 3) at magnitude Js (T, broadcast against (...)); returns
    the clipped vectors and the mask (...) of clipped ones."""
    mag = np.linalg.norm(J, axis=-1)
    over = mag > Js
    scale = np.where(over, Js / np.where(mag > 0, mag, 1.0), 1.0)
    return J * scale[..., None], over



def rated_current_box(design: Design) -> np.ndarray:
    """Vertices (v, k) of the box ``|I_k| <= max_current_A`` (A); beyond 10 coils, each coil alone
    at +-max and all at +-max (2^k vertices become too many)."""
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    k = imax.size
    if k == 0:
        return np.zeros((1, 0))
    if k > 10:
        rows = [np.zeros(k), imax, -imax]
        for i in range(k):
            e = np.zeros(k)
            e[i] = imax[i]
            rows += [e, -e]
        return np.array(rows)
    return np.array(list(itertools.product(*[(-v, v) for v in imax]))).reshape(-1, k)
