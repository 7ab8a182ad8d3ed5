"""Axial force-gap-current curves: hover current, k_z, k_i and the payload envelope.

For iron-free (and unsaturated linear-core) designs the force is affine in the coil currents,
``F(pose, I) = F0(pose) + sum_k I_k f_k(pose)`` (superposition), so one
:func:`fields.physics.wrench.wrench_basis` evaluation serves every current of the family. Sign
conventions: :mod:`fields.analysis.poses`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.analysis.poses import drive_pattern, pose_at_gap
from fields.analysis.stencil import STEP_LENGTH_M, central_difference
from fields.model.design import Design
from fields.physics.wrench import wrench, wrench_basis


@dataclass(frozen=True)
class AxialCurves:
    """Force along up versus gap for a family of currents, and what follows from it.

    Attributes (g gaps, c currents)
    ----------
    gaps_m : (g,)
    heights_m : (g,) height of the floater frame origin along up
    currents_A : (c,) the family's drive currents
    Fup_N : (g, c) magnetic force along up
    F0_N, ki_N_per_A : (g,) zero-current force and force per ampere of the drive pattern
    kz_N_per_m : (g, c) -dF_up/dh at each current
    kz0_N_per_m, dki_dh_N_per_A_m : (g,) -dF0/dh and dk_i/dh (affine model of k_z in current)
    hover_current_A : (g,) current whose force equals the weight (nan where f = 0)
    hover_within_limit : (g,) bool, |hover current| <= max current
    max_total_mass_kg, min_total_mass_kg : (g,) payload envelope as floater mass that can hover
        within +-max current (min clipped at 0)
    max_payload_kg, min_payload_kg : (g,) the same minus the floater's magnets
    contact : (g,) bool, a pose of the gap's stencil touches a body (excluded from equilibria)
    saturated : (g,) bool, a core can saturate within the rated currents at this gap: the force
        is not affine in current there, and the family uses the clipped core model
    error_F_N : (g,) quadrature error estimate of the force
    weight_N, max_current_A : float
        The floater's weight and the drive current limit of the pattern.
    pattern : (k,) the drive pattern
    linear_in_current : bool, no gap is ``saturated``
    """

    gaps_m: np.ndarray
    heights_m: np.ndarray
    currents_A: np.ndarray
    Fup_N: np.ndarray
    F0_N: np.ndarray
    ki_N_per_A: np.ndarray
    kz_N_per_m: np.ndarray
    kz0_N_per_m: np.ndarray
    dki_dh_N_per_A_m: np.ndarray
    hover_current_A: np.ndarray
    hover_within_limit: np.ndarray
    max_total_mass_kg: np.ndarray
    min_total_mass_kg: np.ndarray
    max_payload_kg: np.ndarray
    min_payload_kg: np.ndarray
    contact: np.ndarray
    saturated: np.ndarray
    error_F_N: np.ndarray
    weight_N: float
    max_current_A: float
    pattern: np.ndarray
    linear_in_current: bool

    def kz_at_hover(self) -> np.ndarray:
        """k_z (N/m) at the hover current of each gap (affine model: kz0 - I dki/dh)."""
        return self.kz0_N_per_m - self.hover_current_A * self.dki_dh_N_per_A_m


def family_currents(design: Design, extra=()) -> np.ndarray:
    """0, nominal, maximum and the file's list (sorted, unique), for the first coil's ratings."""
    c = design.coils[0] if design.coils else None
    vals = [0.0]
    if c is not None:
        vals += [c.nominal_current_A, c.max_current_A]
    vals += list(design.study.currents_A) + list(extra)
    return np.unique(np.round(np.asarray(vals, float), 12))


def axial_curves(design: Design, gaps_m=None, currents_A=None, pattern=None, near_field: bool = True) -> AxialCurves:
    """F_up(gap, I), hover current, k_z, k_i and the payload envelope along the study's gap range.

    Derivatives along up are central differences with :data:`fields.analysis.stencil.STEP_LENGTH_M`
    (one batched force call for the gaps g, g + h, g - h).
    """
    gaps = design.study.gaps() if gaps_m is None else np.asarray(gaps_m, float)
    cur = family_currents(design) if currents_A is None else np.asarray(currents_A, float)
    d = drive_pattern(design, pattern)
    up = design.up
    pos, rot = pose_at_gap(design, gaps)
    h = STEP_LENGTH_M
    shift = up[None, :] * h
    P = np.concatenate([pos, pos + shift, pos - shift])
    Rv = np.concatenate([rot, rot, rot])
    b = wrench_basis(design, P, Rv, near_field=near_field)
    n = len(gaps)
    F0 = b.F0_N @ up
    fk = (b.Fk_N_per_A @ up) @ d if len(design.coils) else np.zeros_like(F0)
    F0c, F0p, F0m = F0[:n], F0[n:2 * n], F0[2 * n:]
    fc, fp, fm = fk[:n], fk[n:2 * n], fk[2 * n:]
    kz0 = -central_difference(F0p, F0m, h)
    dki = central_difference(fp, fm, h)
    Fup = F0c[:, None] + fc[:, None] * cur[None, :]
    kz = kz0[:, None] - dki[:, None] * cur[None, :]
    W = design.weight_N
    with np.errstate(divide="ignore", invalid="ignore"):
        ih = np.where(fc != 0, (W - F0c) / fc, np.nan)
    imax = design.coils[0].max_current_A if design.coils else 0.0
    # with a pattern, the limit applies to the coil whose |d_k| is largest
    scale = float(np.max(np.abs(d))) if len(d) else 1.0
    ilim = imax / scale if scale > 0 else 0.0
    within = np.isfinite(ih) & (np.abs(ih) <= ilim * (1 + 1e-12))
    fmax = F0c + np.abs(fc) * ilim
    fmin = F0c - np.abs(fc) * ilim
    g = design.gravity_magnitude
    mmax = np.maximum(fmax, 0.0) / g
    mmin = np.maximum(fmin, 0.0) / g
    mag = design.floater.magnet_mass_kg
    contact = np.asarray(b.contact[:n]) | np.asarray(b.contact[n:2 * n]) | np.asarray(b.contact[2 * n:])
    sat3 = np.asarray(b.core_saturated)
    saturated = sat3[:n] | sat3[n:2 * n] | sat3[2 * n:]
    linear = not bool(np.any(sat3))
    if not linear:
        Fup, kz = _saturated_family(design, pos, rot, cur, d, h, up, saturated, Fup, kz)
    return AxialCurves(
        gaps_m=gaps, heights_m=pos @ up, currents_A=cur, Fup_N=Fup, F0_N=F0c, ki_N_per_A=fc,
        kz_N_per_m=kz, kz0_N_per_m=kz0, dki_dh_N_per_A_m=dki, hover_current_A=ih,
        hover_within_limit=within & ~contact, max_total_mass_kg=mmax, min_total_mass_kg=mmin,
        max_payload_kg=np.maximum(mmax - mag, 0.0), min_payload_kg=np.maximum(mmin - mag, 0.0),
        contact=contact, saturated=saturated, error_F_N=np.asarray(b.error_F_N[:n]), weight_N=W,
        max_current_A=ilim, pattern=d, linear_in_current=linear)


def _saturated_family(design, pos, rot, cur, d, h, up, sat, Fup, kz):
    """Recompute the family at saturated gaps with the nonlinear (clipped) core model."""
    idx = np.flatnonzero(sat)
    if idx.size == 0:
        return Fup, kz
    Fup = Fup.copy()
    kz = kz.copy()
    shift = up[None, :] * h
    for j, I in enumerate(cur):
        P = np.concatenate([pos[idx], pos[idx] + shift, pos[idx] - shift])
        Rv = np.concatenate([rot[idx]] * 3)
        w = wrench(design, P, Rv, I * d)
        F = w.force_N @ up
        m = idx.size
        Fup[idx, j] = F[:m]
        kz[idx, j] = -central_difference(F[m:2 * m], F[2 * m:], h)
    return Fup, kz
