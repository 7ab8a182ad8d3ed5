"""Equilibria of the floater: along the gap axis at one current, and in six axes.

Sign conventions: :mod:`fields.analysis.poses`.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from fields.analysis.curves import AxialCurves, axial_curves
from fields.analysis.poses import AXES, displace, floater_size_m, pose_at_gap
from fields.analysis.stencil import STEP_LENGTH_M, central_difference
from fields.errors import SolverError
from fields.model.design import Design
from fields.physics.wrench import wrench, wrench_basis


def _force_torque(design: Design, P, Rv, I, estimate_error: bool = True):
    """Force, torque (n, 3) and contact (n,) at currents I: the linear basis without cores, the
    saturable iron solve with cores (its force is not affine in current)."""
    if design.cores and len(I):
        w = wrench(design, P, Rv, I, estimate_error=estimate_error)
        return w.force_N, w.torque_Nm, w.contact
    b = wrench_basis(design, P, Rv, estimate_error=estimate_error)
    return (b.force(I) if len(I) else b.F0_N), (b.torque(I) if len(I) else b.T0_Nm), b.contact


#: cells a bracket of the curves may be widened by when the exact force does not cross in it
BRACKET_WIDEN = 2


@dataclass(frozen=True)
class Equilibrium1D:
    """A gap where the force at ``current_A`` equals the weight; ``stable``: ``k_z > 0`` (axially)."""

    gap_m: float
    current_A: float
    kz_N_per_m: float
    stable: bool


def axial_equilibria(design: Design, current_A: float, curves: AxialCurves | None = None,
                     pattern=None) -> list[Equilibrium1D]:
    """Every gap in the study's range where the force at ``current_A`` equals the weight.

    Brackets sign changes of F_up - W on the gap grid and refines each with Brent's method on the
    exact force; ``stable`` marks the axially stable ones (k_z > 0).
    """
    c = curves if curves is not None else axial_curves(design, pattern=pattern)
    d = c.pattern
    j = np.flatnonzero(np.isclose(c.currents_A, current_A, rtol=0, atol=1e-12))
    if j.size:  # the family's own force (saturable with cores)
        F = c.Fup_N[:, j[0]] - c.weight_N
    elif c.core_model == "cells":
        from scipy.interpolate import CubicSpline

        o = np.argsort(c.currents_A)
        F = CubicSpline(c.currents_A[o], c.Fup_N[:, o], axis=1)(current_A) - c.weight_N
    else:
        F = c.F0_N + c.ki_N_per_A * current_A - c.weight_N
    F = np.where(c.contact, np.nan, F)
    out = []
    up = design.axial

    @functools.lru_cache(maxsize=64)
    def resid(gap):
        p, r = pose_at_gap(design, [gap])
        F, _, _ = _force_torque(design, p, r, current_A * d if len(d) else np.zeros(0), estimate_error=False)
        return float(F[0] @ up) - c.weight_N

    gaps = c.gaps_m

    def bracket(i):
        """A sign change of the exact residual around the curves' cell i..i+1 (the curves may be a
        coarser rule than the exact force): that cell, else up to BRACKET_WIDEN cells wider; None
        where the exact force does not cross (a tangency the coarser curves saw as a crossing)."""
        for w in range(BRACKET_WIDEN + 1):
            lo, hi = max(i - w, 0), min(i + 1 + w, len(gaps) - 1)
            if not (np.isfinite(F[lo]) and np.isfinite(F[hi])):
                return None
            ra, rb = resid(float(gaps[lo])), resid(float(gaps[hi]))
            if ra == 0.0 or rb == 0.0 or ra * rb < 0:
                return float(gaps[lo]), float(gaps[hi])
        return None

    if design.floater.soft_iron:
        return _equilibria_from_family(c, F, current_A)
    for i in range(len(F) - 1):
        a, bb = F[i], F[i + 1]
        if not (np.isfinite(a) and np.isfinite(bb)):
            continue
        if a == 0.0:
            g0 = c.gaps_m[i]
        elif a * bb < 0:
            br = bracket(i)
            if br is None:
                continue
            g0 = optimize.brentq(resid, br[0], br[1], xtol=1e-12, rtol=1e-12)
            if any(abs(e.gap_m - g0) <= 1e-9 for e in out):  # found already from a widened bracket
                continue
        else:
            continue
        # stiffness at the root from the exact basis
        hgt = STEP_LENGTH_M
        p, r = pose_at_gap(design, [g0])
        P = np.concatenate([p + up * hgt, p - up * hgt])
        Fst, _, _ = _force_torque(design, P, np.concatenate([r, r]), current_A * d if len(d) else np.zeros(0),
                                  estimate_error=False)
        Fs = Fst @ up
        kz = -central_difference(Fs[0], Fs[1], hgt)
        out.append(Equilibrium1D(gap_m=float(g0), current_A=float(current_A), kz_N_per_m=float(kz), stable=bool(kz > 0)))
    return out


def _equilibria_from_family(c: AxialCurves, F: np.ndarray, current_A: float) -> list[Equilibrium1D]:
    """Roots of ``F_up - W`` for a soft-iron floater from its family's interpolant (each exact force
    there costs a joint cell solve, about a second; the family is interpolated to about 1e-7 of the
    force): a cubic spline in height through the family's gaps, k_z = -dF/dh from it."""
    from scipy.interpolate import CubicSpline

    ok = np.isfinite(F)
    h = c.heights_m[ok]
    o = np.argsort(h)
    h, Fh, g = h[o], F[ok][o], c.gaps_m[ok][o]
    if h.size < 4:
        return []
    s = CubicSpline(h, Fh)
    out = []
    for r in s.solve(0.0, extrapolate=False):
        gap = float(np.interp(r, h, g))
        kz = -float(s(r, 1))
        out.append(Equilibrium1D(gap_m=gap, current_A=float(current_A), kz_N_per_m=kz, stable=bool(kz > 0)))
    return sorted(out, key=lambda e: e.gap_m)


@dataclass(frozen=True)
class Equilibrium:
    """A pose where force and torque balance gravity on the free axes.

    ``residual_force_N``/``residual_torque_Nm``: magnetic force plus weight, and torque about the
    centre of mass, at the pose found; ``iterations``: force evaluations used.
    """

    position_m: np.ndarray
    rotvec_rad: np.ndarray
    currents_A: np.ndarray
    gap_m: float
    residual_force_N: np.ndarray
    residual_torque_Nm: np.ndarray
    free_axes: tuple[str, ...]
    iterations: int


#: transverse offsets and tilts below this (in floater sizes and radians) are rounding of the
#: root finder on a symmetric design: on the symmetry axis they vanish exactly
SNAP_TOL = 1e-9


def _snap_to_axis(design: Design, x: np.ndarray, idx) -> None:
    """Put the solution of an axisymmetric design exactly back on its axis (in place) when the
    root finder left it there to rounding: transverse force and torque vanish there by symmetry,
    and the exact on-axis routes apply. The spin about the axis is a symmetry (a neutral mode):
    it is set to zero."""
    from fields.physics.axial import symmetry_axis_xy

    if symmetry_axis_xy(design) is None or np.any(np.asarray(design.study.floater_rotvec_rad) != 0.0):
        return
    for j, a in enumerate(idx):
        if (a in (0, 1, 3, 4) and abs(x[j]) < SNAP_TOL) or a == 5:  # spin about the axis is a symmetry
            x[j] = 0.0


def find_equilibrium(design: Design, currents_A=None, start_gap_m: float | None = None,
                     free_axes: tuple[str, ...] | None = None, tol_rel: float = 1e-9) -> Equilibrium:
    """Pose where the magnetic force balances gravity and the torque vanishes on the free axes.

    Solves for the free generalized coordinates (displacements of the centre of mass and
    rotations about it) from the pose at ``start_gap_m`` (default: the operating gap) with
    scipy's hybrid Powell method. Raises SolverError naming the start, axes and residual when it
    does not converge.
    """
    I = np.zeros(len(design.coils)) if currents_A is None else np.asarray(currents_A, float)
    free = tuple(design.study.free_axes if free_axes is None else free_axes)
    idx = [AXES.index(a) for a in free]
    g0 = design.study.operating_gap_m if start_gap_m is None else start_gap_m
    p0, r0 = pose_at_gap(design, [g0])
    p0, r0 = p0[0], r0[0]
    W = design.weight_N
    size = floater_size_m(design)
    gvec = np.asarray(design.study.gravity_m_per_s2) * design.floater.mass_kg
    scale = np.array([W, W, W, W * size, W * size, W * size])
    calls = [0]

    def residual(x):
        dq = np.zeros(6)
        dq[idx] = x * np.where(np.array(idx) < 3, size, 1.0)
        P, Rv = displace(design, p0, r0, dq)
        F, T, contact = _force_torque(design, P, Rv, I, estimate_error=False)
        calls[0] += 1
        if bool(contact[0]):
            return np.full(len(idx), 1e3)
        return (np.concatenate([F[0] + gvec, T[0]]) / scale)[idx]

    # the start is often the equilibrium already (an axisymmetric floater on its axis at the gap
    # where its hover current balances the weight): accept it when its residual is within the
    # tolerance, as the root finder would, without the finite-difference Jacobian it would build
    x0 = np.zeros(len(idx))
    res0 = residual(x0)
    if len(idx) == 0 or float(np.max(np.abs(res0), initial=0.0)) <= tol_rel:
        x, success = x0, True
    else:
        sol = optimize.root(residual, x0, method="hybr", options={"xtol": 1e-12})
        x, success = sol.x, bool(sol.success)
    _snap_to_axis(design, x, idx)
    res = residual(x)
    if not success and np.max(np.abs(res), initial=0.0) > tol_rel * 10 or np.max(np.abs(res), initial=0.0) > 1e-6:
        raise SolverError(
            f"equilibrium: no pose found from gap {g0 * 1e3:.4g} mm at currents {list(np.round(I, 6))} A "
            f"over axes {', '.join(free)} (Powell hybrid method, {calls[0]} force evaluations); "
            f"remaining force/torque residual {np.max(np.abs(res)):.3g} x weight")
    dq = np.zeros(6)
    dq[idx] = x * np.where(np.array(idx) < 3, size, 1.0)
    P, Rv = displace(design, p0, r0, dq)
    gdir = np.asarray(design.study.gap_direction)
    gap = float((P[0] - np.asarray(design.study.gap_origin_m)) @ gdir)
    F, T, _ = _force_torque(design, P, Rv, I)
    F = F[0] + gvec
    T = T[0]
    return Equilibrium(position_m=P[0], rotvec_rad=Rv[0], currents_A=I, gap_m=gap, residual_force_N=F,
                       residual_torque_Nm=T, free_axes=free, iterations=calls[0])
