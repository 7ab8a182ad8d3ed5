"""Axial curves, equilibria, stiffness, stability verdict and maps of the floater.

Everything here builds on :func:`fields.physics.forces.wrench_basis`: for iron-free (and unsaturated
linear-core) designs the force is affine in the coil currents, F(pose, I) = F0(pose) + sum_k I_k
f_k(pose), so one basis evaluation serves every current.

Sign conventions
----------------
- "up" is minus the gravity direction; heights are measured along up.
- ``F_up`` is the magnetic force along up (N). The floater hovers where F_up equals its weight.
- Stiffness ``k = -dF/dq`` (N/m): positive restores, negative pushes away (unstable).
  ``k_z = -dF_up/dh`` with ``h`` the height; ``k_i = dF_up/dI`` (N/A).
- Multi-coil designs drive their coils with a *drive pattern* d (k,): coil currents are
  ``I * d``; by default every coil carries the same current (d = 1), i.e. the coils in series.
- Rotations are about the floater's centre of mass, about world axes; torques are about the
  centre of mass. Gravity acts at the centre of mass and therefore adds no torque there; the
  pendulum effect of a centre of mass below the magnetic centre enters through the lever arm of
  the magnetic force, which the torque about the (moving) centre of mass contains.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import optimize
from scipy.spatial.transform import Rotation

from fields.errors import SolverError
from fields.model.design import Design

AXES = ("x", "y", "z", "rx", "ry", "rz")
#: central-difference steps for the stiffness (METHODS.md section 4: 1e-6 m and 1e-4 rad balance
#: truncation (h^2) against rounding (eps/h) for forces of order 0.1-10 N at sizes of ~10 mm)
STEP_LENGTH_M = 1e-6
STEP_ANGLE_RAD = 1e-4


# ---------------------------------------------------------------------------------------------
# poses


def pose_at_gap(design: Design, gaps_m) -> tuple[np.ndarray, np.ndarray]:
    """Floater frame positions (g, 3) and rotation vectors (g, 3) at gaps (g,)."""
    pos = design.study.floater_origin_m(gaps_m)
    rot = np.broadcast_to(np.asarray(design.study.floater_rotvec_rad, float), pos.shape).copy()
    return pos, rot


def com_world(design: Design, position_m, rotvec_rad) -> np.ndarray:
    """World position(s) of the floater's centre of mass for frame pose(s)."""
    p = np.atleast_2d(position_m)
    R = Rotation.from_rotvec(np.atleast_2d(rotvec_rad))
    return p + R.apply(np.asarray(design.floater.centre_of_mass_m, float))


def displace(design: Design, position_m, rotvec_rad, dq) -> tuple[np.ndarray, np.ndarray]:
    """Move a pose by generalized displacements dq (m, 6): translations of the centre of mass
    along world x, y, z, then rotations about world axes through the centre of mass."""
    dq = np.atleast_2d(dq)
    p0 = np.asarray(position_m, float)
    R0 = Rotation.from_rotvec(np.asarray(rotvec_rad, float))
    c0 = p0 + R0.apply(np.asarray(design.floater.centre_of_mass_m, float))
    Rd = Rotation.from_rotvec(dq[:, 3:6])
    Rn = Rd * R0
    cn = c0[None, :] + dq[:, 0:3]
    pn = cn - Rn.apply(np.asarray(design.floater.centre_of_mass_m, float))
    return pn, Rn.as_rotvec()


def drive_pattern(design: Design, pattern=None) -> np.ndarray:
    """Drive pattern d (k,): coil currents are I * d (default: every coil the same current)."""
    k = len(design.coils)
    if pattern is None:
        return np.ones(k)
    d = np.asarray(pattern, float)
    if d.shape != (k,):
        from fields.errors import GeometryError

        raise GeometryError("drive pattern", "the pattern", f"{k} numbers, one per coil", list(d))
    return d


# ---------------------------------------------------------------------------------------------
# axial curves


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
    hover_current_A : (g,) current whose force equals the weight (nan where f = 0)
    hover_within_limit : (g,) bool, |hover current| <= max current
    max_total_mass_kg, min_total_mass_kg : (g,) payload envelope as floater mass that can hover
        within +-max current (min clipped at 0)
    max_payload_kg, min_payload_kg : (g,) the same minus the floater's magnets
    contact : (g,) bool
    error_F_N : (g,) quadrature error estimate of the force
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
    error_F_N: np.ndarray
    weight_N: float
    max_current_A: float
    pattern: np.ndarray
    linear_in_current: bool
    warnings: tuple[str, ...] = ()

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


def _basis(design, positions, rotvecs, order="standard", near_field=True):
    from fields.physics.forces import wrench_basis

    return wrench_basis(design, positions, rotvecs, order=order, near_field=near_field)


def axial_curves(design: Design, gaps_m=None, currents_A=None, pattern=None, near_field: bool = True) -> AxialCurves:
    """F_up(gap, I), hover current, k_z, k_i and the payload envelope along the study's gap range."""
    gaps = design.study.gaps() if gaps_m is None else np.asarray(gaps_m, float)
    cur = family_currents(design) if currents_A is None else np.asarray(currents_A, float)
    d = drive_pattern(design, pattern)
    up = design.up
    pos, rot = pose_at_gap(design, gaps)
    h = STEP_LENGTH_M
    # central differences along up: one batched call for g, g+h, g-h
    shift = up[None, :] * h
    P = np.concatenate([pos, pos + shift, pos - shift])
    Rv = np.concatenate([rot, rot, rot])
    b = _basis(design, P, Rv, near_field=near_field)
    n = len(gaps)
    F0 = b.F0_N @ up
    fk = (b.Fk_N_per_A @ up) @ d if len(design.coils) else np.zeros_like(F0)
    F0c, F0p, F0m = F0[:n], F0[n:2 * n], F0[2 * n:]
    fc, fp, fm = fk[:n], fk[n:2 * n], fk[2 * n:]
    kz0 = -(F0p - F0m) / (2 * h)
    dki = (fp - fm) / (2 * h)
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
    warnings = list(b.warnings)
    sat = np.asarray(getattr(b, "core_saturated", np.zeros(3 * n, bool)))
    linear = not bool(np.any(sat))
    if not linear:
        warnings.append("a core reaches its saturation polarization at some gaps: the force is no longer "
                        "affine in current there; curves at those gaps use the clipped core")
        Fup, kz = _saturated_family(design, pos, rot, cur, d, h, up, sat[:n] | sat[n:2 * n] | sat[2 * n:], Fup, kz)
    if np.any(contact):
        warnings.append(f"{int(contact.sum())} of {n} gaps put the floater in contact with a body; "
                        "they are marked contact and excluded from equilibria")
    return AxialCurves(
        gaps_m=gaps, heights_m=pos @ up, currents_A=cur, Fup_N=Fup, F0_N=F0c, ki_N_per_A=fc,
        kz_N_per_m=kz, kz0_N_per_m=kz0, dki_dh_N_per_A_m=dki, hover_current_A=ih,
        hover_within_limit=within & ~contact, max_total_mass_kg=mmax, min_total_mass_kg=mmin,
        max_payload_kg=np.maximum(mmax - mag, 0.0), min_payload_kg=np.maximum(mmin - mag, 0.0),
        contact=contact, error_F_N=np.asarray(b.error_F_N[:n]), weight_N=W, max_current_A=ilim,
        pattern=d, linear_in_current=linear, warnings=tuple(warnings))


def _saturated_family(design, pos, rot, cur, d, h, up, sat, Fup, kz):
    """Recompute the family at saturated gaps with the nonlinear (clipped) core model."""
    from fields.physics.forces import wrench

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
        kz[idx, j] = -(F[m:2 * m] - F[2 * m:]) / (2 * h)
    return Fup, kz


@dataclass(frozen=True)
class Equilibrium1D:
    gap_m: float
    current_A: float
    kz_N_per_m: float
    stable: bool

    @property
    def label(self) -> str:
        return "axially stable" if self.stable else "axially unstable"


def axial_equilibria(design: Design, current_A: float, curves: AxialCurves | None = None,
                     pattern=None) -> list[Equilibrium1D]:
    """Every gap in the study's range where the force at ``current_A`` equals the weight.

    Brackets sign changes of F_up - W on the gap grid and refines each with Brent's method on the
    exact force. Each equilibrium is labelled axially stable (k_z > 0) or unstable.
    """
    c = curves if curves is not None else axial_curves(design, pattern=pattern)
    d = c.pattern
    F = c.F0_N + c.ki_N_per_A * current_A - c.weight_N
    F = np.where(c.contact, np.nan, F)
    out = []
    up = design.up

    def resid(gap):
        p, r = pose_at_gap(design, [gap])
        b = _basis(design, p, r)
        return float(b.F0_N[0] @ up + current_A * ((b.Fk_N_per_A[0] @ up) @ d if len(d) else 0.0)) - c.weight_N

    for i in range(len(F) - 1):
        a, bb = F[i], F[i + 1]
        if not (np.isfinite(a) and np.isfinite(bb)):
            continue
        if a == 0.0:
            g0 = c.gaps_m[i]
        elif a * bb < 0:
            g0 = optimize.brentq(resid, c.gaps_m[i], c.gaps_m[i + 1], xtol=1e-12, rtol=1e-12)
        else:
            continue
        # stiffness at the root from the exact basis
        hgt = STEP_LENGTH_M
        p, r = pose_at_gap(design, [g0])
        P = np.concatenate([p + up * hgt, p - up * hgt])
        b = _basis(design, P, np.concatenate([r, r]))
        Fs = b.F0_N @ up + current_A * ((b.Fk_N_per_A @ up) @ d if len(d) else 0.0)
        kz = -(Fs[0] - Fs[1]) / (2 * hgt)
        out.append(Equilibrium1D(gap_m=float(g0), current_A=float(current_A), kz_N_per_m=float(kz), stable=bool(kz > 0)))
    return out


# ---------------------------------------------------------------------------------------------
# stiffness matrix


@dataclass(frozen=True)
class Stiffness:
    """6x6 stiffness K = -d(F, T)/d(x, y, z, rx, ry, rz) about the centre of mass.

    ``K`` in N/m (translation rows/cols), N/rad, N m/m and N m/rad; ``error`` the Richardson error
    bar per entry (|R - D_h|, R the extrapolated value); ``force_N``/``torque_Nm`` at the pose.
    """

    K: np.ndarray
    error: np.ndarray
    force_N: np.ndarray
    torque_Nm: np.ndarray
    position_m: np.ndarray
    rotvec_rad: np.ndarray
    currents_A: np.ndarray
    step_length_m: float
    step_angle_rad: float

    @property
    def translational(self) -> np.ndarray:
        return self.K[:3, :3]

    def earnshaw_residual(self) -> tuple[float, float]:
        """(trace of the translational block, trace / largest |diagonal|)."""
        t = float(np.trace(self.translational))
        s = float(np.max(np.abs(np.diag(self.translational))))
        return t, (abs(t) / s if s > 0 else 0.0)


def stiffness_stencil(design: Design, position_m, rotvec_rad, step_length_m: float = STEP_LENGTH_M,
                      step_angle_rad: float = STEP_ANGLE_RAD):
    """The 25 poses of the stiffness stencil (steps +-h and +-2h on each of the six axes, then the
    pose itself) and a function that turns the basis evaluated there into a :class:`Stiffness`.

    Returns
    -------
    positions_m (25, 3), rotvecs_rad (25, 3), finish : callable(basis, currents_A) -> Stiffness
    """
    steps = np.array([step_length_m] * 3 + [step_angle_rad] * 3)
    dq = []
    for s in (1.0, 2.0):
        for j in range(6):
            e = np.zeros(6)
            e[j] = s * steps[j]
            dq.append(e)
            dq.append(-e)
    dq.append(np.zeros(6))
    P, Rv = displace(design, position_m, rotvec_rad, np.array(dq))

    def finish(b, currents_A) -> Stiffness:
        I = np.asarray(currents_A, float)
        F = b.force(I) if len(I) else b.F0_N
        T = b.torque(I) if len(I) else b.T0_Nm
        W = np.concatenate([F, T], axis=1)  # (25, 6)
        D = np.zeros((2, 6, 6))
        for si in range(2):
            for j in range(6):
                D[si, :, j] = -(W[si * 12 + 2 * j] - W[si * 12 + 2 * j + 1]) / (2 * (si + 1) * steps[j])
        R = (4 * D[0] - D[1]) / 3
        return Stiffness(K=R, error=np.abs(R - D[0]), force_N=F[-1], torque_Nm=T[-1],
                         position_m=np.asarray(position_m, float), rotvec_rad=np.asarray(rotvec_rad, float),
                         currents_A=I, step_length_m=step_length_m, step_angle_rad=step_angle_rad)

    return P, Rv, finish


def stiffness_matrix(design: Design, position_m, rotvec_rad, currents_A=None,
                     step_length_m: float = STEP_LENGTH_M, step_angle_rad: float = STEP_ANGLE_RAD) -> Stiffness:
    """The 6x6 stiffness at one pose and coil currents, by central differences of the exact
    force with Richardson extrapolation (steps h and 2h; the error bar is |R - D_h|).

    Step rule: h = 1e-6 m for translations and 1e-4 rad for rotations by default (balances the
    O(h^2) truncation of the central difference against rounding of order eps |F| / h).
    All 25 poses go through one batched force evaluation.
    """
    I = np.zeros(len(design.coils)) if currents_A is None else np.asarray(currents_A, float)
    P, Rv, finish = stiffness_stencil(design, position_m, rotvec_rad, step_length_m, step_angle_rad)
    return finish(_basis(design, P, Rv), I)


# ---------------------------------------------------------------------------------------------
# equilibrium in six axes


@dataclass(frozen=True)
class Equilibrium:
    position_m: np.ndarray
    rotvec_rad: np.ndarray
    currents_A: np.ndarray
    gap_m: float
    residual_force_N: np.ndarray
    residual_torque_Nm: np.ndarray
    free_axes: tuple[str, ...]
    iterations: int


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
    size = _floater_size(design)
    gvec = np.asarray(design.study.gravity_m_per_s2) * design.floater.mass_kg
    scale = np.array([W, W, W, W * size, W * size, W * size])
    calls = [0]

    def residual(x):
        dq = np.zeros(6)
        dq[idx] = x * np.where(np.array(idx) < 3, size, 1.0)
        P, Rv = displace(design, p0, r0, dq)
        b = _basis(design, P, Rv)
        calls[0] += 1
        if bool(b.contact[0]):
            return np.full(len(idx), 1e3)
        F = (b.force(I) if len(I) else b.F0_N)[0] + gvec
        T = (b.torque(I) if len(I) else b.T0_Nm)[0]
        return (np.concatenate([F, T]) / scale)[idx]

    sol = optimize.root(residual, np.zeros(len(idx)), method="hybr", options={"xtol": 1e-12})
    res = residual(sol.x)
    if not sol.success and np.max(np.abs(res)) > tol_rel * 10 or np.max(np.abs(res)) > 1e-6:
        raise SolverError(
            f"equilibrium: no pose found from gap {g0 * 1e3:.4g} mm at currents {list(np.round(I, 6))} A "
            f"over axes {', '.join(free)} (Powell hybrid method, {calls[0]} force evaluations); "
            f"remaining force/torque residual {np.max(np.abs(res)):.3g} x weight")
    dq = np.zeros(6)
    dq[idx] = sol.x * np.where(np.array(idx) < 3, size, 1.0)
    P, Rv = displace(design, p0, r0, dq)
    gdir = np.asarray(design.study.gap_direction)
    gap = float((P[0] - np.asarray(design.study.gap_origin_m)) @ gdir)
    b = _basis(design, P, Rv)
    F = (b.force(I) if len(I) else b.F0_N)[0] + gvec
    T = (b.torque(I) if len(I) else b.T0_Nm)[0]
    return Equilibrium(position_m=P[0], rotvec_rad=Rv[0], currents_A=I, gap_m=gap, residual_force_N=F,
                       residual_torque_Nm=T, free_axes=free, iterations=calls[0])


def _floater_size(design: Design) -> float:
    """A length scale of the floater (m): the largest dimension of its magnets."""
    s = 0.0
    for m in design.floater.magnets:
        if m.shape == "mesh":
            s = max(s, float(np.ptp(m.mesh_vertices_m, axis=0).max()))
        else:
            s = max(s, max(m.dimensions_m))
    return s


# ---------------------------------------------------------------------------------------------
# stability verdict


@dataclass(frozen=True)
class Mode:
    name: str
    stable: bool
    stiffness: float
    unit: str
    frequency_Hz: float | None
    growth_time_s: float | None
    vector: np.ndarray
    neutral: bool = False

    def text(self) -> str:
        if self.neutral:
            return f"{self.name}: neutral (no restoring stiffness)"
        if self.stable:
            f = f", {self.frequency_Hz:.3g} Hz" if self.frequency_Hz else ""
            return f"{self.name}: stable, {self.stiffness:.3g} {self.unit}{f}"
        t = f", grows with time constant {self.growth_time_s * 1e3:.3g} ms" if self.growth_time_s else ""
        return f"{self.name}: unstable, needs feedback, {self.stiffness:.3g} {self.unit}{t}"


@dataclass(frozen=True)
class Verdict:
    modes: tuple[Mode, ...]
    unstable_count: int
    earnshaw_trace_N_per_m: float
    earnshaw_residual: float
    stiffness: Stiffness
    mass_matrix: np.ndarray
    free_axes: tuple[str, ...]
    notes: tuple[str, ...] = field(default_factory=tuple)
    iron: bool = False

    def lines(self) -> list[str]:
        out = [m.text() for m in self.modes]
        out.append(f"axes needing active control: {self.unstable_count}")
        why = ("not expected to vanish: the iron core's magnetization follows the floater" if self.iron
               else "vanishes for rigid magnets in iron-free fields (Earnshaw)")
        out.append(f"Earnshaw check: trace of translational stiffness {self.earnshaw_trace_N_per_m:.3g} N/m "
                   f"({self.earnshaw_residual:.2g} of the largest diagonal entry; {why})")
        return out


_MODE_CLASS = {"x": "sideways", "y": "sideways", "z": "vertical", "rx": "tilt", "ry": "tilt", "rz": "spin about vertical"}


def mass_matrix(design: Design, rotvec_rad) -> np.ndarray:
    """6x6 mass matrix: m on the translations, the inertia tensor about the centre of mass
    (world axes, rotated with the floater) on the rotations."""
    R = Rotation.from_rotvec(np.asarray(rotvec_rad, float)).as_matrix()
    J = R @ np.asarray(design.floater.inertia_kg_m2) @ R.T
    M = np.zeros((6, 6))
    M[:3, :3] = np.eye(3) * design.floater.mass_kg
    M[3:, 3:] = J
    return M


def stability_verdict(design: Design, stiff: Stiffness, free_axes=None) -> Verdict:
    """Modes of M q'' + K q = 0 over the free axes, each named by its dominant axis.

    The generalized eigenproblem K v = lambda M v gives each mode; lambda > 0 is stable with
    frequency sqrt(lambda) / 2 pi, lambda < 0 grows with time constant 1 / sqrt(-lambda). The
    reported stiffness is lambda times the mass (or moment of inertia) of the dominant axis.
    Modes of equal lambda and the same kind (sideways x and y of an axisymmetric design) are
    merged ("sideways x/y"). A mode whose stiffness is below 1e-7 of the largest entry of its
    kind is neutral (e.g. the spin of an axisymmetric floater).
    """
    free = tuple(design.study.free_axes if free_axes is None else free_axes)
    idx = [AXES.index(a) for a in free]
    K = stiff.K[np.ix_(idx, idx)]
    M = mass_matrix(design, stiff.rotvec_rad)[np.ix_(idx, idx)]
    from scipy.linalg import eig

    lam, V = eig(K, M)
    lam = lam.real
    V = V.real
    order = np.argsort(lam)
    raw = []
    Kd = np.abs(np.diag(stiff.K))
    for j in order:
        v = V[:, j]
        share = v**2 * np.diag(M)
        a = free[int(np.argmax(share))]
        ai = AXES.index(a)
        mi = M[idx.index(ai), idx.index(ai)]
        k_eff = float(lam[j] * mi)
        ref = Kd[:3].max() if ai < 3 else Kd[3:].max()
        neutral = abs(k_eff) <= 1e-7 * max(ref, 1e-300)
        raw.append((a, ai, float(lam[j]), k_eff, neutral, v))
    modes: list[Mode] = []
    notes = []
    used = [False] * len(raw)
    unstable_axes = 0
    for i, (a, ai, lam_i, k_eff, neutral, v) in enumerate(raw):
        if used[i]:
            continue
        used[i] = True
        group = [a]
        for j in range(i + 1, len(raw)):
            b = raw[j]
            if not used[j] and _MODE_CLASS[b[0]] == _MODE_CLASS[a] and abs(b[2] - lam_i) <= 1e-4 * max(abs(lam_i), 1e-30) + 1e-12:
                used[j] = True
                group.append(b[0])
        kind = _MODE_CLASS[a]
        if kind in ("sideways", "tilt"):
            letters = "x/y" if len(group) == 2 else group[0].lstrip("r")
            name = f"{kind} {letters}" if kind == "sideways" else f"tilt about {letters}"
        else:
            name = kind
        unit = "N/m" if ai < 3 else "N m/rad"
        if neutral:
            modes.append(Mode(name, True, 0.0, unit, None, None, v, neutral=True))
            notes.append(f"{name}: neutral (no restoring stiffness; it may drift slowly)")
        elif lam_i > 0:
            modes.append(Mode(name, True, k_eff, unit, float(np.sqrt(lam_i) / (2 * np.pi)), None, v))
        else:
            modes.append(Mode(name, False, k_eff, unit, None, float(1 / np.sqrt(-lam_i)), v))
            unstable_axes += len(group)
    tr, rel = stiff.earnshaw_residual()
    return Verdict(modes=tuple(modes), unstable_count=unstable_axes, earnshaw_trace_N_per_m=tr, earnshaw_residual=rel,
                   stiffness=stiff, mass_matrix=mass_matrix(design, stiff.rotvec_rad), free_axes=free,
                   notes=tuple(notes), iron=bool(design.cores))


# ---------------------------------------------------------------------------------------------
# maps: gap x lateral offset and gap x tilt


@dataclass(frozen=True)
class PoseMap:
    """Force and torque over a grid of gap (g) x second coordinate (s): a lateral offset along
    world x (m) or a tilt about world y through the centre of mass (rad).

    ``force_N``/``torque_Nm`` (g, s, 3) at the given currents; ``restoring`` (g, s) bool is True
    where the sideways force (offset map) or the tilt torque (tilt map) pushes back towards the
    centre; ``passively_centred`` additionally requires the vertical force to be within the coil's
    authority (the floater can be held at that gap); ``contact`` (g, s) bool.
    """

    kind: str
    gaps_m: np.ndarray
    coordinate: np.ndarray
    coordinate_unit: str
    force_N: np.ndarray
    torque_Nm: np.ndarray
    restoring: np.ndarray
    passively_centred: np.ndarray
    contact: np.ndarray
    currents_A: np.ndarray


def pose_map(design: Design, kind: str = "lateral", gaps_m=None, coordinate=None, currents_A=None,
             chunk: int = 4096) -> PoseMap:
    """Force/torque maps versus gap and lateral offset (``kind="lateral"``) or tilt (``"tilt"``)."""
    st = design.study
    gaps = np.linspace(st.gap_min_m, st.gap_max_m, 50) if gaps_m is None else np.asarray(gaps_m, float)
    if coordinate is None:
        if kind == "lateral":
            coordinate = np.linspace(-st.lateral_span_m, st.lateral_span_m, st.lateral_points)
        else:
            coordinate = np.linspace(-st.tilt_span_rad, st.tilt_span_rad, st.tilt_points)
    s = np.asarray(coordinate, float)
    I = np.array([c.nominal_current_A for c in design.coils]) if currents_A is None else np.asarray(currents_A, float)
    pos0, rot0 = pose_at_gap(design, gaps)
    G, S = len(gaps), len(s)
    P = np.empty((G, S, 3))
    Rv = np.empty((G, S, 3))
    for i in range(G):
        dq = np.zeros((S, 6))
        if kind == "lateral":
            dq[:, 0] = s
        elif kind == "tilt":
            dq[:, 4] = s
        else:
            raise ValueError(f"pose_map: kind must be 'lateral' or 'tilt'; got {kind!r}")
        P[i], Rv[i] = displace(design, pos0[i], rot0[i], dq)
    P = P.reshape(-1, 3)
    Rv = Rv.reshape(-1, 3)
    F = np.empty_like(P)
    T = np.empty_like(P)
    contact = np.empty(len(P), bool)
    for a in range(0, len(P), chunk):
        # maps use the plain cap rule: fast, accurate to ~1e-3 within a few mm of a source edge
        b = _basis(design, P[a:a + chunk], Rv[a:a + chunk], near_field=False)
        F[a:a + chunk] = b.force(I) if len(I) else b.F0_N
        T[a:a + chunk] = b.torque(I) if len(I) else b.T0_Nm
        contact[a:a + chunk] = b.contact
    F = F.reshape(G, S, 3)
    T = T.reshape(G, S, 3)
    contact = contact.reshape(G, S)
    if kind == "lateral":
        restoring = F[..., 0] * s[None, :] < 0
    else:
        restoring = T[..., 1] * s[None, :] < 0
    zero = np.abs(s) < 1e-15
    # at the centre itself use the neighbouring columns' verdict
    if np.any(zero):
        j0 = int(np.flatnonzero(zero)[0])
        nb = [j for j in (j0 - 1, j0 + 1) if 0 <= j < S]
        restoring[:, j0] = np.all(restoring[:, nb], axis=1)
    up = design.up
    W = design.weight_N
    # vertical authority: can the coils' current range hold the weight at this gap?
    curves = None
    holdable = np.ones(G, bool)
    if design.coils:
        curves = axial_curves(design, gaps_m=gaps, currents_A=[0.0], near_field=False)
        holdable = (curves.max_total_mass_kg * design.gravity_magnitude >= W) & (curves.min_total_mass_kg * design.gravity_magnitude <= W)
    else:
        Fz = F[..., :] @ up
        holdable = np.any(np.isclose(Fz, W, rtol=0.05), axis=1)
    passive = restoring & holdable[:, None] & ~contact
    return PoseMap(kind=kind, gaps_m=gaps, coordinate=s, coordinate_unit="m" if kind == "lateral" else "rad",
                   force_N=F, torque_Nm=T, restoring=restoring & ~contact, passively_centred=passive,
                   contact=contact, currents_A=I)


@dataclass(frozen=True)
class GapStiffness:
    """Lateral and tilt stiffness versus gap at the hover current (or given currents)."""

    gaps_m: np.ndarray
    currents_A: np.ndarray  # (g, k)
    k_lateral_N_per_m: np.ndarray  # (g,) mean of k_xx, k_yy
    k_vertical_N_per_m: np.ndarray
    k_tilt_Nm_per_rad: np.ndarray  # (g,) mean of k_rxrx, k_ryry


def stiffness_versus_gap(design: Design, gaps_m=None, currents_A=None, at_hover: bool = True,
                         pattern=None) -> GapStiffness:
    """Diagonal stiffness (lateral, vertical, tilt) versus gap, batched in one force call.

    With ``at_hover`` the current at each gap is the hover current of the drive pattern (so the
    vertical force balances the weight); otherwise ``currents_A`` (k,) or the nominal currents.
    """
    st = design.study
    gaps = np.linspace(st.gap_min_m, st.gap_max_m, 40) if gaps_m is None else np.asarray(gaps_m, float)
    d = drive_pattern(design, pattern)
    if at_hover and design.coils:
        c = axial_curves(design, gaps_m=gaps, currents_A=[0.0], pattern=pattern, near_field=False)
        ih = np.nan_to_num(c.hover_current_A)
        Ik = ih[:, None] * d[None, :]
    else:
        I = np.array([c.nominal_current_A for c in design.coils]) if currents_A is None else np.asarray(currents_A, float)
        Ik = np.broadcast_to(I, (len(gaps), len(design.coils)))
    pos, rot = pose_at_gap(design, gaps)
    steps = np.array([STEP_LENGTH_M] * 3 + [STEP_ANGLE_RAD] * 3)
    axes = [0, 1, 2, 3, 4]
    Ps, Rs = [], []
    for i in range(len(gaps)):
        dq = []
        for j in axes:
            e = np.zeros(6)
            e[j] = steps[j]
            dq += [e, -e]
        P, Rv = displace(design, pos[i], rot[i], np.array(dq))
        Ps.append(P)
        Rs.append(Rv)
    P = np.concatenate(Ps)
    Rv = np.concatenate(Rs)
    # an overview across the gap range: the plain cap rule (see pose_map)
    b = _basis(design, P, Rv, near_field=False)
    m = 2 * len(axes)
    F0 = b.F0_N.reshape(len(gaps), m, 3)
    T0 = b.T0_Nm.reshape(len(gaps), m, 3)
    if design.coils:
        Fk = b.Fk_N_per_A.reshape(len(gaps), m, len(design.coils), 3)
        Tk = b.Tk_Nm_per_A.reshape(len(gaps), m, len(design.coils), 3)
        F = F0 + np.einsum("gmkc,gk->gmc", Fk, Ik)
        T = T0 + np.einsum("gmkc,gk->gmc", Tk, Ik)
    else:
        F, T = F0, T0
    W = np.concatenate([F, T], axis=2)
    kdiag = np.zeros((len(gaps), 5))
    for jj, j in enumerate(axes):
        kdiag[:, jj] = -(W[:, 2 * jj, j] - W[:, 2 * jj + 1, j]) / (2 * steps[j])
    # gaps where any stencil pose touches a body have no stiffness
    touching = np.asarray(b.contact).reshape(len(gaps), m).any(axis=1)
    kdiag[touching] = np.nan
    return GapStiffness(gaps_m=gaps, currents_A=Ik, k_lateral_N_per_m=0.5 * (kdiag[:, 0] + kdiag[:, 1]),
                        k_vertical_N_per_m=kdiag[:, 2], k_tilt_Nm_per_rad=0.5 * (kdiag[:, 3] + kdiag[:, 4]))


# ---------------------------------------------------------------------------------------------
# multi-coil allocation


@dataclass(frozen=True)
class Allocation:
    """Current-to-wrench matrix G (6, k) at a pose: [F; T] per ampere of each coil."""

    G: np.ndarray
    condition_number: float
    rank: int
    axes: tuple[str, ...]
    length_scale_m: float
    position_m: np.ndarray
    rotvec_rad: np.ndarray

    def currents_for(self, wanted_force_N, wanted_torque_Nm, max_current_A, axes=AXES) -> np.ndarray:
        """Currents (k,) producing the wanted force/torque change on ``axes`` by bounded least squares.

        Raises SolverError when the wanted wrench cannot be made within the current limits.
        """
        want = np.concatenate([np.asarray(wanted_force_N, float), np.asarray(wanted_torque_Nm, float)])
        idx = [AXES.index(a) for a in axes]
        scale = np.array([1, 1, 1, 1 / self.length_scale_m, 1 / self.length_scale_m, 1 / self.length_scale_m])
        A = (self.G * scale[:, None])[idx]
        y = (want * scale)[idx]
        lim = np.broadcast_to(np.asarray(max_current_A, float), (self.G.shape[1],))
        sol = optimize.lsq_linear(A, y, bounds=(-lim, lim))
        resid = A @ sol.x - y
        tol = 1e-6 * max(np.linalg.norm(y), 1e-12)
        if np.linalg.norm(resid) > max(tol, 1e-9 * np.linalg.norm(A, ord=2)) and np.linalg.norm(resid) > 1e-3 * np.linalg.norm(y):
            free = np.linalg.lstsq(A, y, rcond=None)[0]
            raise SolverError(
                f"allocation: wanted force {np.round(want[:3], 6).tolist()} N, torque {np.round(want[3:], 9).tolist()} N m "
                f"on axes {', '.join(axes)} needs currents {np.round(free, 4).tolist()} A without limits, beyond the "
                f"limits +-{np.round(lim, 4).tolist()} A; best within limits misses by {np.linalg.norm(resid):.3g} (scaled N)")
        return sol.x


def allocation_matrix(design: Design, position_m, rotvec_rad, axes=None) -> Allocation:
    """The current-to-force/torque matrix at a pose and its condition number.

    Torque rows are divided by the floater's size so that both halves are in newtons before the
    condition number (ratio of extreme singular values) is taken over the rows of ``axes``
    (default: the study's free axes; a spin row an axisymmetric floater cannot feel would make
    it infinite).
    """
    b = _basis(design, np.atleast_2d(position_m), np.atleast_2d(rotvec_rad))
    G = np.concatenate([b.Fk_N_per_A[0].T, b.Tk_Nm_per_A[0].T], axis=0)  # (6, k)
    L = _floater_size(design)
    scale = np.array([1, 1, 1, 1 / L, 1 / L, 1 / L])
    rows = [AXES.index(a) for a in (design.study.free_axes if axes is None else axes)]
    sv = np.linalg.svd((G * scale[:, None])[rows], compute_uv=False)
    rank = int(np.sum(sv > 1e-9 * sv[0])) if sv.size and sv[0] > 0 else 0
    cond = float(sv[0] / sv[-1]) if sv.size and sv[-1] > 1e-12 * sv[0] else float("inf")
    return Allocation(G=G, condition_number=cond, rank=rank, axes=tuple(AXES[r] for r in rows), length_scale_m=L, position_m=np.asarray(position_m, float),
                      rotvec_rad=np.asarray(rotvec_rad, float))


# ---------------------------------------------------------------------------------------------
# the axis a controller must hold


@dataclass(frozen=True)
class ControlAxis:
    """The least stable translational axis at an equilibrium and how the coils act on it.

    The coils are driven with currents ``I0 + i * pattern`` (i the control current, A);
    ``force_per_ampere_N_per_A`` is the force along ``direction`` per ampere of i, and
    ``stiffness_N_per_m`` is -dF/ds along it (negative: unstable).
    """

    name: str
    index: int
    direction: np.ndarray
    stiffness_N_per_m: float
    force_per_ampere_N_per_A: float
    pattern: np.ndarray
    bias_currents_A: np.ndarray


def control_axis(design: Design, stiff: Stiffness) -> ControlAxis:
    """Pick the translational axis with the most negative stiffness (ties: vertical first) and
    the coil pattern that pushes along it: the sign of each coil's force per ampere on that
    axis, coils with less than 1e-6 of the largest share left out."""
    diag = np.diag(stiff.K)[:3]
    order = [2, 0, 1]
    j = min(order, key=lambda a: (diag[a], order.index(a)))
    direction = np.eye(3)[j]
    if j == 2:
        direction = design.up * np.sign(design.up[2]) if design.up[2] != 0 else direction
    if not design.coils:
        return ControlAxis(("sideways x", "sideways y", "vertical")[j], j, direction, float(diag[j]), 0.0,
                           np.zeros(0), np.zeros(0))
    b = _basis(design, np.atleast_2d(stiff.position_m), np.atleast_2d(stiff.rotvec_rad))
    g = b.Fk_N_per_A[0] @ direction  # (k,)
    big = np.abs(g) >= 1e-6 * np.abs(g).max() if np.abs(g).max() > 0 else np.zeros_like(g, bool)
    pattern = np.where(big, np.sign(g), 0.0)
    ki = float(g @ pattern)
    name = {0: "sideways x", 1: "sideways y", 2: "vertical"}[j]
    return ControlAxis(name, j, direction, float(stiff.K[j, j]), ki, pattern, np.asarray(stiff.currents_A, float))
