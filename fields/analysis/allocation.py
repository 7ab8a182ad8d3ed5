"""How the coils act on the floater: the current-to-wrench matrix and the axis to control."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize

from fields.analysis.poses import AXES, floater_size_m
from fields.analysis.stiffness import Stiffness
from fields.errors import SolverError
from fields.model.design import Design
from fields.physics.wrench import wrench_basis


@dataclass(frozen=True)
class Allocation:
    """Current-to-wrench matrix G (6, k) at a pose: [F; T] per ampere of each coil (N/A, N m/A).

    ``condition_number`` and ``rank`` are those of the rows ``axes`` with the torque rows divided
    by ``length_scale_m`` (both halves in newtons).
    """

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
    b = wrench_basis(design, np.atleast_2d(position_m), np.atleast_2d(rotvec_rad))
    G = np.concatenate([b.Fk_N_per_A[0].T, b.Tk_Nm_per_A[0].T], axis=0)  # (6, k)
    L = floater_size_m(design)
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
    ax = design.axial
    if j == 2:
        direction = ax * np.sign(ax[2]) if ax[2] != 0 else direction
    # "vertical" where gravity has a share along the axial direction; an offset study across gravity: "axial"
    names = ("sideways x", "sideways y", "axial" if design.gravity_across_axial else "vertical")
    if not design.coils:
        return ControlAxis(names[j], j, direction, float(diag[j]), 0.0, np.zeros(0), np.zeros(0))
    if design.floater.soft_iron:  # induced floater: the incremental force per ampere at the bias currents
        g = _incremental_force_per_ampere(design, stiff) @ direction
    else:
        b = wrench_basis(design, np.atleast_2d(stiff.position_m), np.atleast_2d(stiff.rotvec_rad))
        g = b.Fk_N_per_A[0] @ direction  # (k,)
    big = np.abs(g) >= 1e-6 * np.abs(g).max() if np.abs(g).max() > 0 else np.zeros_like(g, bool)
    pattern = np.where(big, np.sign(g), 0.0)
    ki = float(g @ pattern)
    return ControlAxis(names[j], j, direction, float(stiff.K[j, j]), ki, pattern, np.asarray(stiff.currents_A, float))


#: current step (A, relative to max(1, |I|)) of the incremental force per ampere of a soft-iron floater
INCREMENT_A = 1e-4


def _incremental_force_per_ampere(design: Design, stiff: Stiffness) -> np.ndarray:
    """dF/dI_k (k, 3) at the stiffness pose and currents by central differences of the saturable force."""
    from fields.physics.wrench import wrench

    I0 = np.asarray(stiff.currents_A, dtype=float)
    out = np.zeros((len(design.coils), 3))
    for k in range(len(design.coils)):
        e = INCREMENT_A * max(1.0, abs(I0[k]))
        F = [wrench(design, np.atleast_2d(stiff.position_m), np.atleast_2d(stiff.rotvec_rad),
                    I0 + s * e * np.eye(len(design.coils))[k], estimate_error=False).force_N[0] for s in (1.0, -1.0)]
        out[k] = (F[0] - F[1]) / (2 * e)
    return out
