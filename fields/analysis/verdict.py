"""Stability verdict: the small-oscillation modes of the floater about an equilibrium.

The modes of ``M q'' + K q = 0`` over the free axes (generalized eigenproblem ``K v = lambda M v``;
e.g. Goldstein, Poole and Safko, Classical Mechanics, 3rd ed. 2002, ch. 6): ``lambda > 0`` is a
stable oscillation of frequency ``sqrt(lambda) / 2 pi``, ``lambda < 0`` grows with time constant
``1 / sqrt(-lambda)`` and needs feedback. Results are structured (kinds, axes, numbers, flags);
the sentences for people are built by the report and command-line layers.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum

import numpy as np
from scipy.linalg import eig
from scipy.spatial.transform import Rotation

from fields.analysis.poses import AXES
from fields.analysis.stiffness import Stiffness
from fields.model.design import Design

#: a mode whose stiffness is below this fraction of the largest diagonal entry of its kind
#: (translational or rotational) is neutral, e.g. the spin of an axisymmetric floater
NEUTRAL_FRACTION = 1e-7
#: modes of the same kind whose eigenvalues agree to this relative tolerance are merged
#: (sideways x and y of an axisymmetric design)
DEGENERATE_RTOL = 1e-4
#: a mode is "coupled" when the axes of the other family (rotations for a translational mode,
#: translations for a rotational one) carry more than this share of its kinetic energy
#: (``v_i^2 M_ii`` normalised over the free axes); its modal stiffness then differs from the
#: matrix diagonal entry of its dominant axis, which is quoted beside it (a stated threshold:
#: common practice, no source)
COUPLING_SHARE = 0.01


class ModeKind(str, Enum):
    """The kind of motion a mode's dominant axis makes."""

    SIDEWAYS = "sideways"  # x or y
    VERTICAL = "vertical"  # z
    TILT = "tilt"  # rx or ry
    SPIN = "spin"  # rz, about the vertical


#: the kind of each generalized coordinate
MODE_KIND = {"x": ModeKind.SIDEWAYS, "y": ModeKind.SIDEWAYS, "z": ModeKind.VERTICAL,
             "rx": ModeKind.TILT, "ry": ModeKind.TILT, "rz": ModeKind.SPIN}


@dataclass(frozen=True)
class Mode:
    """One mode (or a merged pair of degenerate modes) of the floater about an equilibrium.

    Attributes
    ----------
    kind : ModeKind
    axes : tuple of str
        The dominant axis of the mode (``("z",)`` for the vertical mode), or, for a merged group of
        degenerate modes, every free axis of its kind (``("x", "y")`` for the sideways pair of an
        axisymmetric design); names of :data:`fields.analysis.poses.AXES`.
    stable : bool
        No growth (True also for neutral modes).
    neutral : bool
        No restoring stiffness (below ``NEUTRAL_FRACTION``); ``stiffness`` is then 0.
    stiffness : float
        ``lambda`` times the mass (or moment of inertia) of the dominant axis, in ``unit``.
    unit : str
        ``"N/m"`` (translational dominant axis) or ``"N m/rad"`` (rotational).
    frequency_Hz : float or None
        Oscillation frequency of a stable, non-neutral mode.
    growth_time_s : float or None
        Time constant of an unstable mode.
    vector : ndarray, shape (f,)
        Mode shape over the free axes.
    diagonal_stiffness : tuple of float
        The stiffness matrix's diagonal entry ``K[a, a]`` of each axis in ``axes`` (in ``unit``).
    coupled_axes : tuple of str
        Axes of the other family (translation/rotation) that carry more than
        :data:`COUPLING_SHARE` of the kinetic energy (empty: not coupled).
    coupling_share : float
        Share of the kinetic energy on the other family's axes (largest over a merged group).
    z_vertical : bool
        Gravity acts along z (the usual stack): z is "vertical", x and y "sideways"; otherwise
        (a horizontal shaft, an offset study across gravity) z is "axial" and x, y "radial".
    """

    kind: ModeKind
    axes: tuple[str, ...]
    stable: bool
    neutral: bool
    stiffness: float
    unit: str
    frequency_Hz: float | None
    growth_time_s: float | None
    vector: np.ndarray
    diagonal_stiffness: tuple[float, ...] = ()
    coupled_axes: tuple[str, ...] = ()
    coupling_share: float = 0.0
    z_vertical: bool = True

    @property
    def coupled(self) -> bool:
        """The mode mixes translation and rotation beyond :data:`COUPLING_SHARE`."""
        return bool(self.coupled_axes)


@dataclass(frozen=True)
class Verdict:
    """The modes at one equilibrium and the Earnshaw check.

    Attributes
    ----------
    modes : tuple of Mode
        In ascending order of eigenvalue.
    unstable_count : int
        Axes needing active control (every mode of a merged unstable group counts).
    earnshaw_trace_N_per_m, earnshaw_residual : float
        Trace of the translational stiffness and its ratio to the largest diagonal entry;
        it vanishes for rigid magnets in iron-free fields, not with an iron core (``iron``).
    stiffness : Stiffness
    mass_matrix : ndarray, shape (6, 6)
    free_axes : tuple of str
    iron : bool
        The design has soft-iron cores (their induced magnetization follows the floater).
    """

    modes: tuple[Mode, ...]
    unstable_count: int
    earnshaw_trace_N_per_m: float
    earnshaw_residual: float
    stiffness: Stiffness
    mass_matrix: np.ndarray
    free_axes: tuple[str, ...]
    iron: bool = False
    coils: bool = True


def mass_matrix(design: Design, rotvec_rad) -> np.ndarray:
    """6x6 mass matrix: m on the translations, the inertia tensor about the centre of mass
    (world axes, rotated with the floater) on the rotations."""
    R = Rotation.from_rotvec(np.asarray(rotvec_rad, float)).as_matrix()
    J = R @ np.asarray(design.floater.inertia_kg_m2) @ R.T
    M = np.zeros((6, 6))
    M[:3, :3] = np.eye(3) * design.floater.mass_kg
    M[3:, 3:] = J
    return M


def _other_family(free, share: np.ndarray, ai: int) -> tuple[float, tuple[str, ...]]:
    """Kinetic-energy share of the axes of the other family than ``ai`` (rotations for a
    translation) and, when it is above :data:`COUPLING_SHARE`, the axes that carry it."""
    total = float(np.sum(share))
    if total <= 0:
        return 0.0, ()
    frac = share / total
    other = [n for n, f in enumerate(free) if (AXES.index(f) < 3) != (ai < 3)]
    part = float(sum(frac[n] for n in other))
    if part <= COUPLING_SHARE:
        return part, ()
    # the axes that carry the coupling: each with at least a fifth of the other family's share
    return part, tuple(free[n] for n in sorted((n for n in other if frac[n] >= 0.2 * part), key=lambda n: -frac[n]))


def stability_verdict(design: Design, stiff: Stiffness, free_axes=None) -> Verdict:
    """Modes of M q'' + K q = 0 over the free axes, each named by its dominant axis.

    The reported stiffness is lambda times the mass (or moment of inertia) of the dominant axis
    (the axis with the largest share ``v_i^2 M_ii`` of the mode's kinetic energy). Modes of equal
    lambda (within ``DEGENERATE_RTOL``) and the same kind are merged. A mode whose stiffness is
    below ``NEUTRAL_FRACTION`` of the largest diagonal entry of its kind is neutral.
    """
    free = tuple(design.study.free_axes if free_axes is None else free_axes)
    idx = [AXES.index(a) for a in free]
    K = stiff.K[np.ix_(idx, idx)]
    M = mass_matrix(design, stiff.rotvec_rad)[np.ix_(idx, idx)]
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
        neutral = abs(k_eff) <= NEUTRAL_FRACTION * max(ref, 1e-300)
        raw.append((a, ai, float(lam[j]), k_eff, neutral, v, _other_family(free, share, ai)))
    modes: list[Mode] = []
    used = [False] * len(raw)
    unstable_axes = 0
    for i, (a, ai, lam_i, k_eff, neutral, v, other) in enumerate(raw):
        if used[i]:
            continue
        used[i] = True
        group = [a]
        others = [other]
        for j in range(i + 1, len(raw)):
            b = raw[j]
            if (not used[j] and MODE_KIND[b[0]] == MODE_KIND[a]
                    and abs(b[2] - lam_i) <= DEGENERATE_RTOL * max(abs(lam_i), 1e-30) + 1e-12):
                used[j] = True
                group.append(b[0])
                others.append(b[6])
        kind = MODE_KIND[a]
        # a merged (degenerate) group spans every free axis of its kind; the dominant axes of
        # its eigenvectors are arbitrary within that plane
        axes = tuple(f for f in free if MODE_KIND[f] is kind) if len(group) > 1 else (a,)
        unit = "N/m" if ai < 3 else "N m/rad"
        share = max(o[0] for o in others)
        coupled = tuple(x for x in free if any(x in o[1] for o in others))
        if len(group) > 1 and coupled:  # a merged pair couples with every axis of its partners' kinds
            kinds = {MODE_KIND[x] for x in coupled}
            coupled = tuple(x for x in free if MODE_KIND[x] in kinds)
        extra = dict(diagonal_stiffness=tuple(float(stiff.K[AXES.index(x), AXES.index(x)]) for x in axes),
                     coupled_axes=coupled, coupling_share=float(share), z_vertical=design.z_vertical)
        if neutral:
            modes.append(Mode(kind, axes, True, True, 0.0, unit, None, None, v, **extra))
        elif lam_i > 0:
            modes.append(Mode(kind, axes, True, False, k_eff, unit, float(np.sqrt(lam_i) / (2 * np.pi)), None, v, **extra))
        else:
            modes.append(Mode(kind, axes, False, False, k_eff, unit, None, float(1 / np.sqrt(-lam_i)), v, **extra))
            unstable_axes += len(group)
    tr, rel = stiff.earnshaw_residual()
    return Verdict(modes=tuple(modes), unstable_count=unstable_axes, earnshaw_trace_N_per_m=tr, earnshaw_residual=rel,
                   stiffness=stiff, mass_matrix=mass_matrix(design, stiff.rotvec_rad), free_axes=free,
                   iron=bool(design.cores) or bool(design.floater.soft_iron), coils=bool(design.coils))
