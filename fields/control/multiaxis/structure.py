"""Structural checks before any controller design: modes, controllability, observability.

Modes are the solutions of ``K phi = lambda M phi`` over the free axes (``K`` symmetrised; its
antisymmetric part is reported), mass-normalised (``phi^T M phi = 1``). In modal coordinates
``q = Phi eta`` the rigid body is ``eta'' = -lambda eta + Phi^T G i``, so for each mode:

- growth rate ``p = sqrt(-lambda)`` (1/s) when ``lambda < 0`` (unstable);
- neutral when ``|lambda|`` is within the stiffness error bar (``|phi|^T E |phi|``, E the
  Richardson error of K) or below 1e-7 of the largest modal stiffness;
- PBH test (Hautus 1969; e.g. Kailath, Linear Systems, 1980, sec. 2.4): for ``A = [[0, I],
  [-M^-1 K, 0]]`` the left eigenvector at ``s = +-p`` is ``[s M phi; M phi]``, so the mode is
  controllable from the coil currents iff ``b = phi^T G != 0`` and observable from the sensors iff
  ``c = Cq phi != 0`` (right eigenvector ``[phi; s phi]``). A voltage drive adds the invertible
  coil dynamics ``L i' = u - R i - G^T q'`` in cascade and does not change the answer.
- "Non-zero" is judged relative to the scale of a mass-normalised mode:
  ``|b| > PBH_TOLERANCE * ||M_d^-1/2 G||`` (``M_d`` the diagonal of M: what a mode along one axis
  would get) and above three times the quadrature error bar of G propagated along ``|phi|``;
  likewise per sensor, ``|c| > PBH_TOLERANCE * ||Cq_s M_d^-1/2||`` and above three times the
  finite-difference error bar. Exact symmetry zeros cancel to about
  1e-14 of the scale; ``PBH_TOLERANCE = 1e-6`` sits above the force engine's relative accuracy
  (about 1e-9) and far below any usable coupling (common practice, no source).

Degenerate modes (sideways x/y of an axisymmetric floater) form an eigenspace; its basis is
chosen aligned with the coordinate axes (the axis with the largest share first) so that each
mode has a name like "sideways x" or "tilt about y".

The coil cross-talk in a Hall reading (``Di i``) is assumed subtracted before the controller
(``c_k I_k``, the usual practice): observability is judged from ``Cq`` alone.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import eigh

from fields.control.multiaxis.plant import MultiaxisPlant, jsonable
from fields.errors import SolverError

#: relative PBH threshold (see the module docstring)
PBH_TOLERANCE = 1e-6
#: modal stiffness below this share of the largest is neutral (as in the stability verdict)
NEUTRAL_SHARE = 1e-7
#: reference motion for authority and signal numbers: 1 mm along, or 1 degree about, the
#: dominant axis of a mode (a design scale, not physics)
REFERENCE_LENGTH_M = 1e-3
REFERENCE_ANGLE_RAD = np.deg2rad(1.0)

_KIND = {"x": "sideways", "y": "sideways", "z": "vertical", "rx": "tilt", "ry": "tilt", "rz": "spin"}


def _mode_name(axis: str, z_vertical: bool = True) -> str:
    """Mode name of a dominant axis; with gravity across z (``z_vertical`` false) z is "axial z"
    and x, y are "radial" (as in :func:`fields.io.wording.mode_name`)."""
    kind = _KIND[axis]
    if kind == "sideways":
        return f"sideways {axis}" if z_vertical else f"radial {axis}"
    if kind == "tilt":
        return f"tilt about {axis[1]}"
    if kind == "spin":
        return "spin about vertical" if z_vertical else "spin about z"
    return "vertical" if z_vertical else "axial z"


@dataclass(frozen=True)
class SensorSuggestion:
    """A Hall sensor that would see a mode: position (m), unit axis, and its signal (T) for the
    mode's reference motion (1 mm or 1 degree of its dominant axis)."""

    position_m: np.ndarray
    axis: np.ndarray
    signal_T: float
    text: str


@dataclass(frozen=True)
class ModeCheck:
    """One mode of the free rigid body and whether a loop can be closed around it.

    Attributes
    ----------
    name : str
        e.g. "tilt about y" (dominant axis), unique within a report.
    dominant_axis : str
    shares : dict
        Kinetic-energy share of each free axis in the mode.
    shape : ndarray, shape (n,)
        Mass-normalised mode vector over the free axes.
    eigenvalue_per_s2 : float
        ``lambda`` of ``K phi = lambda M phi`` (negative: unstable).
    kind : {"unstable", "neutral", "stable"}
    growth_rate_per_s : float
        ``sqrt(-lambda)`` for unstable modes, else 0.
    frequency_Hz : float
        ``sqrt(lambda) / 2 pi`` for stable modes, else 0.
    modal_input : ndarray, shape (k,)
        ``phi^T G``: modal acceleration per ampere of each coil.
    controllable, observable : bool
    control_ratio, observe_ratio : float
        ``|b| / scale`` and the best sensor's ``|c| / scale`` (see the module docstring).
    hold_current_A : float
        Current (norm over coils, least squares) that balances the mode's instability at its
        reference motion: ``|lambda| eta_ref / |b|`` (inf without authority).
    sensor_signal : dict
        Each sensor's output change for the reference motion (its unit).
    wanted_wrench : ndarray, shape (n,)
        ``M phi`` normalised: the force/torque direction a coil must produce to act on the mode.
    suggestion : SensorSuggestion or None
        For an unobservable mode that needs control.
    text : str
    """

    name: str
    dominant_axis: str
    shares: dict
    shape: np.ndarray
    eigenvalue_per_s2: float
    kind: str
    growth_rate_per_s: float
    frequency_Hz: float
    modal_input: np.ndarray
    controllable: bool
    observable: bool
    control_ratio: float
    observe_ratio: float
    hold_current_A: float
    sensor_signal: dict
    wanted_wrench: np.ndarray
    reference_amplitude: float
    suggestion: SensorSuggestion | None
    text: str

    @property
    def needs_control(self) -> bool:
        return self.kind == "unstable"


@dataclass(frozen=True)
class StructureReport:
    """Mode-by-mode structural check of a plant.

    ``status``: "passive" (no unstable mode: nothing to control, not a failure), "closable"
    (every unstable mode is controllable and observable) or "refused". ``controlled`` names the
    modes a design acts on (controllable and observable ones); ``left_open`` the others, with
    the reason in ``notes``.
    """

    modes: tuple[ModeCheck, ...]
    status: str
    reasons: tuple[str, ...]
    controlled: tuple[str, ...]
    left_open: tuple[str, ...]
    stiffness_asymmetry: float
    tolerance: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def unstable(self) -> tuple[ModeCheck, ...]:
        return tuple(m for m in self.modes if m.kind == "unstable")

    @property
    def fastest_growth_rate_per_s(self) -> float:
        return max((m.growth_rate_per_s for m in self.unstable), default=0.0)

    def mode(self, name: str) -> ModeCheck:
        for m in self.modes:
            if m.name == name:
                return m
        raise KeyError(name)

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__ if k != "modes"}
        d["modes"] = [{k: getattr(m, k) for k in m.__dataclass_fields__ if k != "suggestion"}
                      | {"suggestion": None if m.suggestion is None else
                         {k: getattr(m.suggestion, k) for k in m.suggestion.__dataclass_fields__}} for m in self.modes]
        return jsonable(d)


class DesignRefused(SolverError):
    """A controller design cannot be built for this plant; the message says why and what to do."""


class LoopNotClosable(DesignRefused):
    """A controller design was refused: some unstable mode cannot be controlled or observed.

    ``report`` holds the :class:`StructureReport`; the message names each mode and its fix.
    """

    def __init__(self, report: StructureReport) -> None:
        self.report = report
        super().__init__("control design refused: " + "; ".join(report.reasons))


# ---------------------------------------------------------------------------------------------


def _aligned_basis(V: np.ndarray, M: np.ndarray) -> np.ndarray:
    """M-orthonormal basis of span(V) whose vectors line up with the coordinate axes."""
    P = V @ V.T @ M  # M-orthogonal projector onto the span (V is M-orthonormal)
    d = np.diag(M)
    out = []
    cand = list(range(V.shape[0]))
    for _ in range(V.shape[1]):
        best, bv, bs = None, None, -1.0
        for a in cand:
            v = P[:, a].copy()
            for u in out:
                v -= u * (u @ M @ v)
            s = float(np.sqrt(max(v @ M @ v, 0.0)) / np.sqrt(d[a]))
            if s > bs:
                best, bv, bs = a, v, s
        cand.remove(best)
        out.append(bv / np.sqrt(bv @ M @ bv))
    return np.array(out).T


def _modes(M: np.ndarray, K: np.ndarray, free):
    Ks = 0.5 * (K + K.T)
    lam, V = eigh(Ks, M)
    # group near-equal eigenvalues and align each group with the axes
    scale = max(float(np.max(np.abs(lam))), 1e-300)
    i = 0
    while i < len(lam):
        j = i + 1
        while j < len(lam) and abs(lam[j] - lam[i]) <= 1e-6 * scale + 1e-9 * abs(lam[i]):
            j += 1
        if j - i > 1:
            V[:, i:j] = _aligned_basis(V[:, i:j], M)
        i = j
    for c in range(V.shape[1]):
        a = int(np.argmax(np.abs(V[:, c]) * np.sqrt(np.diag(M))))
        if V[a, c] < 0:
            V[:, c] = -V[:, c]
    return lam, V


def _reference_amplitude(phi, dom_index, free):
    ref = REFERENCE_LENGTH_M if free[dom_index] in ("x", "y", "z") else REFERENCE_ANGLE_RAD
    return ref / max(abs(phi[dom_index]), 1e-300)


def _hall_suggestion(design, plant: MultiaxisPlant, phi: np.ndarray, eta_ref: float) -> SensorSuggestion | None:
    """Best Hall axis among candidate points for seeing a mode (finite differences along phi)."""
    from fields.analysis import AXES, displace
    from fields.physics.field_basis import fixed_field_basis, floater_field_T

    cands = [np.asarray(s.position_m, float) for s in design.sensors if getattr(s, "kind", "") == "hall"]
    up = design.axial
    size = max(max(m.dimensions_m) for m in design.floater.magnets if m.shape != "mesh") \
        if any(m.shape != "mesh" for m in design.floater.magnets) else 0.01
    com = np.asarray(plant.position_m) + np.asarray(design.floater.centre_of_mass_m)
    cands += [com - up * 1.5 * size, com + up * 1.5 * size]
    idx = [AXES.index(a) for a in plant.free_axes]
    # modal step: 1e-6 m on the largest translation, 1e-4 rad on the largest rotation
    steps = np.array([1e-6 if a in ("x", "y", "z") else 1e-4 for a in plant.free_axes])
    h = float(np.min(steps / np.maximum(np.abs(phi), 1e-300)))
    dq = np.zeros((2, 6))
    dq[0, idx] = phi * h
    dq[1, idx] = -phi * h
    P, Rv = displace(design, plant.position_m, plant.rotvec_rad, dq)
    best = None
    for p in cands:
        pts = np.broadcast_to(p.reshape(1, 1, 3), (2, 1, 3)).copy()
        B = floater_field_T(design, pts, P, Rv)[:, 0, :]
        if design.cores:
            B = B + fixed_field_basis(design, pts, P, Rv).B0_T[:, 0, :]
        dB = (B[0] - B[1]) / (2 * h) * eta_ref  # field change per reference motion (3,)
        ax = int(np.argmax(np.abs(dB)))
        sig = float(abs(dB[ax]))
        if best is None or sig > best[2]:
            e = np.zeros(3)
            e[ax] = 1.0
            best = (p, e, sig)
    if best is None or best[2] == 0.0:
        return None
    p, e, sig = best
    axis_name = "xyz"[int(np.argmax(e))]
    text = (f"a Hall sensor at [{', '.join(f'{v * 1e3:.4g}' for v in p)}] mm sensing {axis_name} would read "
            f"{sig * 1e3:.3g} mT per reference motion of this mode")
    return SensorSuggestion(np.asarray(p, float), e, sig, text)


def check_structure(plant: MultiaxisPlant, design=None, tolerance: float = PBH_TOLERANCE) -> StructureReport:
    """Modes of the plant and, mode by mode, whether the coils can move and the sensors see it.

    Parameters
    ----------
    plant : MultiaxisPlant
    design : Design, optional
        Needed only to compute a sensor suggestion for unobservable unstable modes.
    tolerance : float
        Relative PBH threshold (module docstring).

    Returns
    -------
    StructureReport
    """
    M, K, G = plant.mass_matrix, plant.stiffness, plant.allocation
    free = plant.free_axes
    asym = float(np.max(np.abs(K - K.T)) / max(float(np.max(np.abs(K))), 1e-300))
    lam, V = _modes(M, K, free)
    Cq = plant.sensor_pose_matrix
    Cerr = np.array([s.pose_gain_error for s in plant.sensors]).reshape(Cq.shape)
    usable = np.array([s.in_range for s in plant.sensors], bool)
    big = max(float(np.max(np.abs(lam))), 1e-300)
    Mih = np.diag(1.0 / np.sqrt(np.diag(M)))  # scale of a mass-normalised mode on one axis
    modes = []
    used = {}
    notes = []
    reasons = []
    for j in range(len(lam)):
        phi = V[:, j]
        sh = phi**2 * np.diag(M)
        sh = sh / sh.sum()
        dom = int(np.argmax(sh))
        base = _mode_name(free[dom], design is None or design.z_vertical)
        used[base] = used.get(base, 0) + 1
        name = base if used[base] == 1 else f"{base} ({used[base]})"
        kerr = float(np.abs(phi) @ plant.stiffness_error @ np.abs(phi))
        lj = float(lam[j])
        if abs(lj) <= max(3 * kerr, NEUTRAL_SHARE * big):
            kind = "neutral"
        else:
            kind = "unstable" if lj < 0 else "stable"
        b = phi @ G if G.size else np.zeros(0)
        bscale = float(np.linalg.norm(Mih @ G)) if G.size else 0.0
        berr = float(np.linalg.norm(np.abs(phi) @ plant.allocation_error)) if G.size else 0.0
        bn = float(np.linalg.norm(b))
        ctrl = bool(G.size and bn > tolerance * bscale and bn > 3 * berr and bn > 0)
        cr = bn / bscale if bscale > 0 else 0.0
        eta_ref = _reference_amplitude(phi, dom, free)
        sig = {}
        best = 0.0
        obs = False
        for s_i, s in enumerate(plant.sensors):
            c = float(Cq[s_i] @ phi)
            cs = float(np.linalg.norm(Cq[s_i] @ Mih))
            ce = float(np.abs(Cerr[s_i]) @ np.abs(phi))
            sig[s.label] = c * eta_ref
            ok = usable[s_i] and abs(c) > tolerance * cs and abs(c) > 3 * ce and c != 0
            obs = obs or bool(ok)
            if cs > 0 and usable[s_i]:
                best = max(best, abs(c) / cs)
        hold = abs(lj) * eta_ref / bn if bn > 0 and ctrl else float("inf")
        ww = M @ phi
        ww = ww / np.linalg.norm(ww)
        rate = float(np.sqrt(-lj)) if kind == "unstable" else 0.0
        freq = float(np.sqrt(lj) / (2 * np.pi)) if kind == "stable" else 0.0
        sugg = None
        if kind == "unstable" and not obs and design is not None:
            sugg = _hall_suggestion(design, plant, phi, eta_ref)
        parts = [name]
        if kind == "unstable":
            parts.append(f"unstable, grows at {rate:.4g} 1/s (time constant {1e3 / rate:.3g} ms)")
        elif kind == "stable":
            parts.append(f"stable, {freq:.3g} Hz")
        else:
            parts.append("neutral (no stiffness within its error bar)")
        parts.append("controllable" if ctrl else "NOT controllable from the coils")
        parts.append("observable" if obs else "NOT observable from the sensors")
        text = ", ".join(parts)
        modes.append(ModeCheck(name, free[dom], {a: float(v) for a, v in zip(free, sh)}, phi, lj, kind, rate, freq,
                               np.asarray(b, float), ctrl, obs, cr, best, hold, sig, ww, eta_ref, sugg, text))
        if kind == "unstable" and not ctrl:
            want = ", ".join(f"{a} {w:+.2f}" for a, w in zip(free, ww) if abs(w) > 0.05)
            if plant.n_coils == 0:
                reasons.append(f"mode '{name}' is unstable and the design has no coils: add coils that "
                               f"push along ({want})")
            else:
                reasons.append(f"mode '{name}' is unstable but no coil acts on it (modal authority {cr:.2g} of its "
                               f"scale): no authority; add a coil (or coil pair) whose force/torque has a component "
                               f"along ({want})")
        if kind == "unstable" and not obs:
            fix = sugg.text if sugg is not None else "add a sensor that responds to its motion"
            reasons.append(f"mode '{name}' is unstable but no sensor sees it (best ratio {best:.2g}); fix: {fix}")
    unstable = [m for m in modes if m.kind == "unstable"]
    controlled = tuple(m.name for m in modes if m.controllable and m.observable)
    left = tuple(m.name for m in modes if m.name not in controlled)
    for m in modes:
        if m.name in left and m.kind != "unstable":
            why = ("not controllable" if not m.controllable else "") + \
                  (" and " if not m.controllable and not m.observable else "") + \
                  ("not observable" if not m.observable else "")
            notes.append(f"{m.name}: {m.kind}, {why}: left open-loop (the model has no mechanical damping, "
                         "so it keeps any motion it is given)")
    for s in plant.sensors:
        notes += [f"sensor {s.name}: {n}" for n in s.notes]
    if not unstable:
        status = "passive"
        notes.append("no unstable mode: the floater needs no active control (passive design)")
    elif reasons:
        status = "refused"
    else:
        status = "closable"
    if asym > 1e-6:
        notes.append(f"the stiffness matrix is not symmetric (antisymmetric part {asym:.2g} of its largest entry); "
                     "modes use its symmetric part")
    return StructureReport(tuple(modes), status, tuple(reasons), controlled, left, asym, tolerance, tuple(notes))
