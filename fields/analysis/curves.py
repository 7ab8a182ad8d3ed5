"""Axial force-gap-current curves: hover current, k_z, k_i and the payload envelope.

For iron-free designs the force is affine in the coil currents,
``F(pose, I) = F0(pose) + sum_k I_k f_k(pose)`` (superposition), so one
:func:`fields.physics.wrench.wrench_basis` evaluation serves every current of the family.
Axisymmetric designs with soft-iron cores use the cell solve's axial family
(:func:`fields.physics.iron_family.iron_axial_family`): linear iron gives ``F0`` and ``f_k``, and
the saturable (B-H curve) solve the correction at every current; the family reports from which
current the force stops being affine at each gap (``saturation_onset_A``). Sign conventions:
:mod:`fields.analysis.poses`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.analysis.poses import drive_pattern, floater_size_m, pose_at_gap
from fields.analysis.stencil import STEP_LENGTH_M, central_difference, richardson
from fields.model.design import Design
from fields.physics.levels import coarser_level
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
    saturated : (g,) bool, some core cell exceeds the saturation fraction of its curve at a
        current of the family at this gap
    error_F_N : (g,) error estimate of the force at the nominal current (largest over the family
        with cores)
    error_Fup_N : (g, c) error estimate of each force of the family: without cores the two-level
        quadrature difference; with cores ``|fine - coarse|`` of the cell solve (which includes
        its face quadrature and coil layers) plus the interpolation tails
    nonlinear_N : (g, c) ``F_up - (F0 + I ki)``: the saturable iron's departure from the affine
        force (zeros without cores)
    saturation_onset_A : (g,) smallest |current| along the drive pattern (positive or negative)
        at which ``|nonlinear_N|`` exceeds ``AFFINE_RTOL`` of the force scale at that gap,
        interpolated between the family's currents; nan where the family stays affine
    error_kz_N_per_m : (g, c) error bar of ``kz_N_per_m``. Iron-free: the Richardson share
        ``|R - D_h|`` (steps h and 2h) plus the quadrature share ``|D_h(level) - D_h(coarser)|``
        (the rule of :func:`fields.analysis.stiffness.stiffness_matrix`). With cores: the force error
        estimate ``error_Fup_N`` over the length ``L = min(gap, floater size)`` (the quadrature error
        is taken to vary on that scale; the finite-difference share, far smaller, is not added)
    core_model : str, ``"none"``, ``"cells"`` (the cell solve) or ``"uniform"``
    ki_at_hover_N_per_A : (g,) dF_up/dI at the hover current (with cores: the saturable solve's
        incremental value, which differs from ``ki_N_per_A``, the linear iron's force per ampere;
        without cores the two are equal)
    weight_N, max_current_A : float
        The force the axial force must balance (the floater's weight; in an offset study the
        weight's share along the gap direction, zero where gravity acts across it) and the drive
        current limit of the pattern. "F_up" is the force along :attr:`Design.axial` (up, or
        the offset study's gap direction).
    pattern : (k,) the drive pattern
    linear_in_current : bool, the force is affine in current (within AFFINE_RTOL) at every gap
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
    error_Fup_N: np.ndarray | None = None
    ki_at_hover_N_per_A: np.ndarray | None = None
    nonlinear_N: np.ndarray | None = None
    saturation_onset_A: np.ndarray | None = None
    core_model: str = "none"
    error_kz_N_per_m: np.ndarray | None = None

    def kz_at_hover(self) -> np.ndarray:
        """k_z (N/m) at the hover current of each gap (affine model: kz0 - I dki/dh)."""
        return self.kz0_N_per_m - self.hover_current_A * self.dki_dh_N_per_A_m

    def kz_error_at_hover(self) -> np.ndarray:
        """Error bar (g,) of :meth:`kz_at_hover`: ``error_kz_N_per_m`` interpolated linearly in
        current between the family's currents (held at the end values beyond them; an upper bound
        inside the family's range, where the iron-free bar is convex in current); nan where there is
        no bar or no hover current."""
        if self.error_kz_N_per_m is None or not self.currents_A.size:
            return np.full(len(self.gaps_m), np.nan)
        o = np.argsort(self.currents_A)
        return np.array([np.interp(i, self.currents_A[o], e[o]) if np.isfinite(i) else np.nan
                         for i, e in zip(self.hover_current_A, self.error_kz_N_per_m)])


def family_currents(design: Design, extra=()) -> np.ndarray:
    """0, nominal, maximum and the file's list (sorted, unique), for the first coil's ratings."""
    c = design.coils[0] if design.coils else None
    vals = [0.0]
    if c is not None:
        vals += [c.nominal_current_A, c.max_current_A]
    vals += list(design.study.currents_A) + list(extra)
    return np.unique(np.round(np.asarray(vals, float), 12))


#: the force counts as affine in current while the saturable correction stays below this share
#: of the largest |force| of the family at that gap (the cell solve's discretisation error is
#: about 1e-3 at the reported level)
AFFINE_RTOL = 1e-3


def axial_curves(design: Design, gaps_m=None, currents_A=None, pattern=None, near_field: bool = True,
                 core_model: str = "cells", estimate_error: bool = True) -> AxialCurves:
    """F_up(gap, I), hover current, k_z, k_i and the payload envelope along the study's gap range.

    Derivatives along up are central differences with :data:`fields.analysis.stencil.STEP_LENGTH_M`
    (one batched force call for the gaps g, g + h, g - h); with cores on the axis, exact
    derivatives of the Chebyshev interpolant of the cell solve's family.

    ``core_model="uniform"`` selects the uniform-magnetization core (for comparison only).
    ``estimate_error=False`` (for searches that use no error bar, e.g. a sweep's operating point,
    whose equilibria are then refined on the exact force): one rule level on the stencil g, g +- h
    only, and NaN error bars; with cores off their axis (every pose a 3-D iron response) that
    level is the fast rule with the coarse cells.
    """
    gaps = design.study.gaps() if gaps_m is None else np.asarray(gaps_m, float)
    cur = family_currents(design) if currents_A is None else np.asarray(currents_A, float)
    d = drive_pattern(design, pattern)
    up = design.axial  # up, or the gap direction of an offset study (gravity may act across it)
    pos, rot = pose_at_gap(design, gaps)
    if design.floater.soft_iron:
        return _requested(_iron_curves(design, gaps, np.union1d(cur, family_currents(design)), d, pos, rot), cur)
    if design.cores and core_model == "cells" and _iron_axis_family_applies(design, pos, rot):
        return _requested(_iron_curves(design, gaps, np.union1d(cur, family_currents(design)), d, pos, rot), cur)
    h = STEP_LENGTH_M
    shift = up[None, :] * h
    n = len(gaps)
    if design.cores:  # one level on the stencil g, g + h, g - h; the engine's own force estimate
        P = np.concatenate([pos, pos + shift, pos - shift])
        # without the estimate: a search over the gap range (the fast rule, coarse cells)
        b = wrench_basis(design, P, np.concatenate([rot] * 3), order=CURVES_ORDER if estimate_error else "fast",
                         estimate_error=estimate_error, near_field=near_field, core_model=core_model)
        error_F = np.asarray(b.error_F_N[:n]) if estimate_error else np.full(n, np.nan)
    elif not estimate_error:  # g, g +- h at the curves' level only
        P = np.concatenate([pos, pos + shift, pos - shift])
        b = wrench_basis(design, P, np.concatenate([rot] * 3), order=CURVES_ORDER, estimate_error=False,
                         near_field=near_field, core_model=core_model)
        error_F = np.full(n, np.nan)
    else:  # g, g +- h, g +- 2h at the level and the next coarser (no extra poses for the estimate)
        P = np.concatenate([pos, pos + shift, pos - shift, pos + 2 * shift, pos - 2 * shift])
        b, error_F, lo = _two_levels(design, P, np.concatenate([rot] * 5), near_field, core_model, n)
    F0 = b.F0_N @ up
    fk = (b.Fk_N_per_A @ up) @ d if len(design.coils) else np.zeros_like(F0)
    F0c, F0p, F0m = F0[:n], F0[n:2 * n], F0[2 * n:3 * n]
    fc, fp, fm = fk[:n], fk[n:2 * n], fk[2 * n:3 * n]
    kz0 = -central_difference(F0p, F0m, h)
    dki = central_difference(fp, fm, h)
    if design.cores:
        L = np.minimum(gaps, floater_size_m(design))
        err_kz = np.repeat((error_F / L)[:, None], len(cur), axis=1)
    elif not estimate_error:
        err_kz = np.full((n, len(cur)), np.nan)
    else:
        err_kz = _kz_bar(design, b, lo, up, d, h, n, cur)
    Fup = F0c[:, None] + fc[:, None] * cur[None, :]
    kz = kz0[:, None] - dki[:, None] * cur[None, :]
    W = design.axial_load_N
    with np.errstate(divide="ignore", invalid="ignore"):
        ih = np.where(fc != 0, (W - F0c) / fc, np.nan)
    imax = design.coils[0].max_current_A if design.coils else 0.0
    # with a pattern, the limit applies to the coil whose |d_k| is largest
    scale = float(np.max(np.abs(d))) if len(d) else 1.0
    ilim = imax / scale if scale > 0 else 0.0
    within = np.isfinite(ih) & (np.abs(ih) <= ilim * (1 + 1e-12))
    fmax = F0c + np.abs(fc) * ilim
    fmin = F0c - np.abs(fc) * ilim
    mmax, mmin = _mass_envelope(design, fmax, fmin)
    mag = design.floater.magnet_mass_kg
    contact = np.asarray(b.contact).reshape(-1, n).any(axis=0)
    sat3 = np.asarray(b.core_saturated)
    saturated = sat3.reshape(-1, n).any(axis=0)
    linear = not bool(np.any(sat3))
    if not linear:
        Fup, kz = _saturated_family(design, pos, rot, cur, d, h, up, saturated, Fup, kz)
    return AxialCurves(
        gaps_m=gaps, heights_m=pos @ up, currents_A=cur, Fup_N=Fup, F0_N=F0c, ki_N_per_A=fc,
        kz_N_per_m=kz, kz0_N_per_m=kz0, dki_dh_N_per_A_m=dki, hover_current_A=ih,
        hover_within_limit=within & ~contact, max_total_mass_kg=mmax, min_total_mass_kg=mmin,
        max_payload_kg=np.maximum(mmax - mag, 0.0), min_payload_kg=np.maximum(mmin - mag, 0.0),
        contact=contact, saturated=saturated, error_F_N=error_F, weight_N=W,
        max_current_A=ilim, pattern=d, linear_in_current=linear,
        error_Fup_N=np.repeat(error_F[:, None], len(cur), axis=1), ki_at_hover_N_per_A=fc, error_kz_N_per_m=err_kz,
        nonlinear_N=np.zeros_like(Fup) if linear else Fup - (F0c[:, None] + fc[:, None] * cur[None, :]),
        saturation_onset_A=np.full(n, np.nan), core_model=core_model if design.cores else "none")


def _two_levels(design: Design, P, Rv, near_field: bool, core_model: str, n: int):
    """The basis at the curves' rule level (all poses) and at the next coarser one (the first 3 n:
    g, g + h, g - h), both iron-free, and the force error estimate of the first n poses as
    :func:`fields.physics.wrench.wrench_basis` reports it (the norm of the two levels' difference
    at the coils' nominal currents)."""
    kw = dict(estimate_error=False, near_field=near_field, core_model=core_model)
    b = wrench_basis(design, P, Rv, order=CURVES_ORDER, **kw)
    lo = wrench_basis(design, P[:3 * n], Rv[:3 * n], order=coarser_level(CURVES_ORDER, "axial_curves"), **kw)
    Inom = np.array([float(c.nominal_current_A) for c in design.coils])
    dF = (b.F0_N[:n] - lo.F0_N[:n]) + np.einsum("k,nki->ni", Inom, b.Fk_N_per_A[:n] - lo.Fk_N_per_A[:n])
    return b, np.linalg.norm(dF, axis=1), lo


def _kz_bar(design: Design, b, lo, up, d, h, n, cur) -> np.ndarray:
    """Error bar (g, c) of k_z = -(F(g + h) - F(g - h)) / (2 h) at each current: the Richardson
    share |R - D_h| (steps h and 2h) plus the quadrature share |D_h(level) - D_h(coarser level)|."""
    def kz_parts(basis, rows):
        F0 = basis.F0_N[rows] @ up
        fk = (basis.Fk_N_per_A[rows] @ up) @ d if len(design.coils) else np.zeros_like(F0)
        return F0, fk

    def dh(basis, s):  # (g, c) -dF_up/dh with step s h
        a, b_ = (1, 2) if s == 1 else (3, 4)
        F0p, fp = kz_parts(basis, slice(a * n, (a + 1) * n))
        F0m, fm = kz_parts(basis, slice(b_ * n, (b_ + 1) * n))
        Fp = F0p[:, None] + fp[:, None] * cur[None, :]
        Fm = F0m[:, None] + fm[:, None] * cur[None, :]
        return -central_difference(Fp, Fm, s * h)

    D1 = dh(b, 1)
    _, rich = richardson(D1, dh(b, 2))
    return rich + np.abs(D1 - dh(lo, 1))


#: rule level of the iron-free curves (the engine's default); the k_z bar uses the next coarser one
CURVES_ORDER = "standard"


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
        w = wrench(design, P, Rv, I * d, core_model="uniform")
        F = w.force_N @ up
        m = idx.size
        Fup[idx, j] = F[:m]
        kz[idx, j] = -central_difference(F[m:2 * m], F[2 * m:], h)
    return Fup, kz


def _requested(c: AxialCurves, cur) -> AxialCurves:
    """The family restricted to the requested currents (the hover search used more)."""
    from dataclasses import replace

    idx = np.array([int(np.argmin(np.abs(c.currents_A - x))) for x in cur], dtype=int)
    return replace(c, currents_A=c.currents_A[idx], Fup_N=c.Fup_N[:, idx], kz_N_per_m=c.kz_N_per_m[:, idx],
                   error_Fup_N=c.error_Fup_N[:, idx], nonlinear_N=c.nonlinear_N[:, idx],
                   error_kz_N_per_m=c.error_kz_N_per_m[:, idx])


def _iron_axis_family_applies(design: Design, pos, rot) -> bool:
    from fields.physics.axial import on_axis_mask, symmetry_axis_xy

    return symmetry_axis_xy(design) is not None and bool(np.all(on_axis_mask(design, pos, rot)))


def _iron_curves(design: Design, gaps, cur, d, pos, rot) -> AxialCurves:
    """The family with the cell solve (axisymmetric designs with cores, on the axis)."""
    from fields.physics.contact import CONTACT_CLEARANCE_M, clearance_m
    from fields.physics.iron_family import iron_axial_family

    up = design.axial
    uz = float(up[2])
    n = len(gaps)
    clear = clearance_m(design, pos, rot)
    contact = clear <= CONTACT_CLEARANCE_M
    ok = ~contact
    Fup = np.zeros((n, cur.size))
    dF = np.zeros((n, cur.size))
    Flin = np.zeros((n, cur.size))
    err = np.zeros((n, cur.size))
    F0 = np.zeros(n)
    fk = np.zeros(n)
    dF0 = np.zeros(n)
    dfk = np.zeros(n)
    sat = np.zeros((n, cur.size), dtype=bool)
    if np.any(ok):
        if design.floater.soft_iron:
            from fields.physics.iron_floater import floater_iron_family

            fam = floater_iron_family(design, pos[ok, 2], gaps[ok], cur[:, None] * d[None, :])
        else:
            fam = iron_axial_family(design, pos[ok, 2], cur[:, None] * d[None, :], float(np.min(clear[ok])))
        Fup[ok], dF[ok], Flin[ok], err[ok] = uz * fam.Fz_N, fam.dFz_dz_N_per_m, uz * fam.Fz_linear_N, fam.error_Fz_N
        F0[ok], dF0[ok] = uz * fam.F0_N, fam.dF0_dz_N_per_m
        fk[ok], dfk[ok] = uz * (fam.Fk_N_per_A @ d), fam.dFk_dz_N_per_A_m @ d
        sat[ok] = fam.saturated
        # the zero-current force and stiffness from the saturable solve itself where the family has
        # I = 0 (the floater magnet alone can saturate the core locally: F0 is then not the
        # unsaturated intercept); ki stays the unsaturated response per ampere
        zero = np.flatnonzero(cur == 0.0)
        if zero.size:
            F0[ok], dF0[ok] = Fup[ok, zero[0]], dF[ok, zero[0]]
    # heights along up: h = uz z, so dF_up/dh = dFz/dz
    kz = -dF
    kz0 = -dF0
    nonlin = Fup - Flin
    scale = np.maximum(np.max(np.abs(Fup), axis=1), 1e-300)
    bent = np.abs(nonlin) > AFFINE_RTOL * scale[:, None]
    onset = _onset(cur, np.abs(nonlin) / (AFFINE_RTOL * scale[:, None]))
    onset[contact] = np.nan
    W = design.axial_load_N
    imax = design.coils[0].max_current_A if design.coils else 0.0
    sc = float(np.max(np.abs(d))) if len(d) else 1.0
    ilim = imax / sc if sc > 0 else 0.0
    ih, ki_h = _hover(cur, Fup, W)
    kz_h = np.array([np.interp(ih[i], cur, kz[i]) if np.isfinite(ih[i]) else np.nan for i in range(n)])
    if design.coils and np.any(ok) and uz != 0.0:
        ih, ki_h, kz_h = _exact_hover(design, pos[:, 2], ok, d, W / uz, ih, ki_h, kz_h, uz)
    within = np.isfinite(ih) & (np.abs(ih) <= ilim * (1 + 1e-12))
    fmax = np.array([_force_at(cur, Fup[i], ilim) for i in range(n)]) if n else np.zeros(0)
    fmin = np.array([_force_at(cur, Fup[i], -ilim) for i in range(n)]) if n else np.zeros(0)
    mmax, mmin = _mass_envelope(design, fmax, fmin)
    mag = design.floater.magnet_mass_kg
    # dki/dh of the affine model: the hover stiffness is then kz0 - I dki/dh; with cores use the
    # family's own k_z at the hover current instead (AxialCurves.kz_at_hover reads this field)
    dki = dfk
    with np.errstate(invalid="ignore", divide="ignore"):
        dki_eff = np.where(np.isfinite(ih) & (ih != 0), (kz0 - kz_h) / np.where(ih != 0, ih, 1.0), dki)
    return AxialCurves(
        gaps_m=gaps, heights_m=pos @ up, currents_A=cur, Fup_N=Fup, F0_N=F0, ki_N_per_A=fk,
        ki_at_hover_N_per_A=np.where(np.isfinite(ki_h), ki_h, fk),
        kz_N_per_m=kz, kz0_N_per_m=kz0, dki_dh_N_per_A_m=dki_eff, hover_current_A=ih,
        hover_within_limit=within & ~contact, max_total_mass_kg=mmax, min_total_mass_kg=mmin,
        max_payload_kg=np.maximum(mmax - mag, 0.0), min_payload_kg=np.maximum(mmin - mag, 0.0),
        contact=contact, saturated=np.any(sat, axis=1), error_F_N=np.max(err, axis=1) if cur.size else np.zeros(n),
        weight_N=W, max_current_A=ilim, pattern=d, linear_in_current=not bool(np.any(bent[ok])),
        error_Fup_N=err, nonlinear_N=nonlin, saturation_onset_A=onset, core_model="cells",
        error_kz_N_per_m=err / np.minimum(gaps, floater_size_m(design))[:, None])


def _exact_hover(design, z, ok, d, target_N, ih, ki_h, kz_h, uz):
    """Hover current, dF_up/dI and k_z there from the saturable solve (secant in current) at the
    heights themselves when there are at most HOVER_NODES; in a longer family at the gap nearest
    the operating gap (elsewhere the family's cubic spline in current stays: it is accurate to
    about 1e-5 of the current on the examples)."""
    from fields.physics.iron import iron_model
    from fields.physics.iron_family import REPORTED_LEVEL, hover_points

    if design.floater.soft_iron:  # the ball is solved with the cores at each height
        from fields.physics.iron_floater import floater_hover_points

        def solve(zz, guess):
            return floater_hover_points(design, zz, d, target_N, guess)
    else:
        model = iron_model(design, REPORTED_LEVEL)

        def solve(zz, guess):
            return hover_points(model, zz, d, target_N, guess)
    idx = np.flatnonzero(ok)
    ih, ki_h, kz_h = ih.copy(), ki_h.copy(), kz_h.copy()
    if idx.size <= HOVER_NODES:
        a, b, c = solve(z[idx], ih[idx])
        ih[idx], ki_h[idx], kz_h[idx] = a, uz * b, c
        return ih, ki_h, kz_h
    gop = design.study.operating_gap_m
    j = idx[int(np.argmin(np.abs(z[idx] - design.study.floater_origin_m([gop])[0, 2])))]
    a, b, c = solve(z[[j]], ih[[j]])
    ih[j], ki_h[j], kz_h[j] = a[0], uz * b[0], c[0]
    return ih, ki_h, kz_h


#: Chebyshev-Lobatto heights of the exact hover current in a family with cores
HOVER_NODES = 17


def _onset(cur, ratio) -> np.ndarray:
    """Smallest |I| (g,) at which ``ratio`` (g, c) crosses 1, on either side of zero current,
    linearly interpolated between the family's currents; nan if it never does."""
    order = np.argsort(cur)
    c = cur[order]
    r = ratio[:, order]
    out = np.full(r.shape[0], np.nan)
    for i in range(r.shape[0]):
        best = np.inf
        for side in (c >= 0, c <= 0):
            idx = np.flatnonzero(side)
            idx = idx[np.argsort(np.abs(c[idx]))]
            for a, b in zip(idx[:-1], idx[1:]):
                if r[i, a] <= 1.0 < r[i, b]:
                    t = (1.0 - r[i, a]) / (r[i, b] - r[i, a])
                    best = min(best, abs(c[a] + t * (c[b] - c[a])))
                    break
            if idx.size and r[i, idx[0]] > 1.0:
                best = min(best, abs(c[idx[0]]))
        out[i] = best if np.isfinite(best) else np.nan
    return out


def _spline(cur, F):
    from scipy.interpolate import CubicSpline

    order = np.argsort(cur)
    return CubicSpline(cur[order], F[order]) if cur.size >= 3 else None


def _mass_envelope(design: Design, fmax, fmin) -> tuple[np.ndarray, np.ndarray]:
    """Largest and smallest total floater mass the axial force range holds at each gap (kg); NaN
    where gravity acts across the axial direction (the axial force then carries no weight)."""
    if design.gravity_across_axial:
        return np.full(np.shape(fmax), np.nan), np.full(np.shape(fmin), np.nan)
    share = float(design.up @ design.axial)
    if share < 0:  # the axial direction points down: an upward force is a negative axial one
        fmax, fmin = -np.asarray(fmin), -np.asarray(fmax)
    g = design.gravity_magnitude * abs(share)
    return np.maximum(fmax, 0.0) / g, np.maximum(fmin, 0.0) / g


def _hover(cur, Fup, W):
    """Hover current (g,) where the family's force (a cubic spline in current through the family,
    linear extrapolation beyond it) equals the weight, and dF/dI there."""
    n = Fup.shape[0]
    ih = np.full(n, np.nan)
    ki = np.full(n, np.nan)
    for i in range(n):
        s = _spline(cur, Fup[i])
        if s is None:
            if cur.size == 2 and cur[1] != cur[0]:
                slope = (Fup[i, 1] - Fup[i, 0]) / (cur[1] - cur[0])
                if slope != 0:
                    ih[i], ki[i] = cur[0] + (W - Fup[i, 0]) / slope, slope
            continue
        lo, hi = float(np.min(cur)), float(np.max(cur))
        roots = [r for r in s.solve(W, extrapolate=False) if lo <= r <= hi]
        if roots:
            r = min(roots, key=lambda x: (round(abs(x), 12), x < 0))  # an even force: the positive root
            ih[i], ki[i] = r, float(s(r, 1))
            continue
        for end in (lo, hi):  # beyond the family: extrapolate along the end slope
            slope = float(s(end, 1))
            if slope != 0:
                r = end + (W - float(s(end))) / slope
                if (end == lo and r < lo) or (end == hi and r > hi):
                    ih[i], ki[i] = r, slope
    return ih, ki


def _force_at(cur, F, I) -> float:
    """Force of the family at current I (spline in current; linear beyond the family's ends)."""
    s = _spline(cur, F)
    if s is None:
        return float(np.interp(I, cur, F)) if cur.size else 0.0
    lo, hi = float(np.min(cur)), float(np.max(cur))
    if I < lo:
        return float(s(lo) + (I - lo) * s(lo, 1))
    if I > hi:
        return float(s(hi) + (I - hi) * s(hi, 1))
    return float(s(I))
