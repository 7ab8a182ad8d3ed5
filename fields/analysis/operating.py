"""The operating point every analysis linearises about: one rule for the report, every command
and the design sweep.

Rule: an axially stable equilibrium at zero coil current (a passive, zero-power height, as in
repulsive bases) is preferred, the one nearest the operating gap; otherwise the floater is held
at the operating gap by its hover current (suspension levitators); when neither exists the
design has no operating point (:class:`fields.errors.SolverError`). The six-axis equilibrium
is then found from there (the study's free axes).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields import analysis
from fields.errors import SolverError
from fields.model.design import Design


@dataclass(frozen=True)
class OperatingPoint:
    """The chosen operating point.

    Attributes
    ----------
    equilibrium : fields.analysis.Equilibrium
        Six-axis equilibrium (pose, currents, residuals).
    currents_A : ndarray, shape (k,)
        Coil currents there.
    passive : bool
        True: the passive zero-current equilibrium; false: held at the operating gap by the
        hover current.
    axial_gap_m : float
        The gap the six-axis search starts from (the passive equilibrium's gap, or the operating gap).
    drive_current_A : float
        The drive current along the drive pattern (0 when passive, else the hover current).
    operating_gap_m : float
        The study's operating gap.
    hover_current_at_operating_gap_A : float
        The current that holds the floater at the operating gap (may exceed the limit; NaN when
        the coils exert no axial force there).
    max_current_A : float
        The drive-current limit of the pattern (:attr:`fields.analysis.AxialCurves.max_current_A`).
    at_operating_gap : fields.analysis.AxialCurves
        Curves at the operating gap alone (zero current): force per ampere, payload envelope.
    chosen : bool
        True: a point the user asked for (:func:`chosen_point`), in general not an equilibrium;
        the residual force and torque say how far from one.
    axially_stable : bool
        False only for a zero-current balance that is axially unstable, the operating point of a
        design without coils that has no stable height (its stiffness and verdict are still given).
    """

    equilibrium: analysis.Equilibrium
    currents_A: np.ndarray
    passive: bool
    axial_gap_m: float
    drive_current_A: float
    operating_gap_m: float
    hover_current_at_operating_gap_A: float
    max_current_A: float
    at_operating_gap: analysis.AxialCurves
    chosen: bool = False
    axially_stable: bool = True

    @property
    def hover_within_limit(self) -> bool:
        """The hover current at the operating gap is finite and within the limit."""
        ih = self.hover_current_at_operating_gap_A
        return bool(np.isfinite(ih) and abs(ih) <= self.max_current_A)


def choose_start(design: Design, curves: analysis.AxialCurves, at_gap: analysis.AxialCurves):
    """(passive, start gap, drive current) by the rule of this module; SolverError when the
    floater can neither rest passively nor hover at the operating gap within the limit."""
    gop = design.study.operating_gap_m
    ih = float(at_gap.hover_current_A[0])
    limit = curves.max_current_A
    stable = [e for e in analysis.axial_equilibria(design, 0.0, curves) if e.stable]
    if stable:
        pick = min(stable, key=lambda e: abs(e.gap_m - gop))
        return True, float(pick.gap_m), 0.0
    if np.isfinite(ih) and abs(ih) <= limit:
        return False, float(gop), ih
    if not design.coils:  # nothing can hold it: describe the zero-current balance nearest the operating gap
        eqs = analysis.axial_equilibria(design, 0.0, curves)
        if eqs:
            return True, float(min(eqs, key=lambda e: abs(e.gap_m - gop)).gap_m), 0.0
    raise SolverError(
        f"operating point: the floater cannot hover at the operating gap {gop * 1e3:.4g} mm within "
        f"+-{limit:g} A (needs {ih:.4g} A) and has no stable height at zero current in "
        f"{design.study.gap_min_m * 1e3:.4g}..{design.study.gap_max_m * 1e3:.4g} mm")


def operating_point(design: Design, curves: analysis.AxialCurves | None = None) -> OperatingPoint:
    """The operating point of ``design`` (see the module's rule).

    Parameters
    ----------
    design : Design
    curves : AxialCurves, optional
        Axial curves over the study's gap range (any currents: the zero-current equilibria use
        their F0 and k_i only); computed when not given.

    Returns
    -------
    OperatingPoint

    Raises
    ------
    SolverError
        No passive stable height and no hover within the current limit, or the six-axis search
        does not converge.
    """
    # the zero-current equilibria need the force at zero current only: one current, not the family
    c = curves if curves is not None else analysis.axial_curves(design, currents_A=[0.0])
    gop = design.study.operating_gap_m
    one = analysis.axial_curves(design, gaps_m=[gop], currents_A=[0.0])
    passive, start, drive = choose_start(design, c, one)
    currents = np.zeros(len(design.coils)) if passive else drive * c.pattern
    eq = analysis.find_equilibrium(design, currents, start_gap_m=start)
    stable = not passive or any(e.stable and abs(e.gap_m - start) <= 1e-12 for e in analysis.axial_equilibria(design, 0.0, c))
    return OperatingPoint(equilibrium=eq, currents_A=currents, passive=passive, axial_gap_m=start,
                          drive_current_A=float(drive), operating_gap_m=float(gop),
                          hover_current_at_operating_gap_A=float(one.hover_current_A[0]),
                          max_current_A=float(c.max_current_A), at_operating_gap=one, axially_stable=stable)


def chosen_point(design: Design, gap_m: float, current_A: float | None = None) -> OperatingPoint:
    """A point the user chose instead of the equilibrium: the floater at ``gap_m`` on the gap
    axis (the study's floater attitude) with the drive current ``current_A`` along the drive
    pattern (default: the hover current at that gap, so only the free transverse axes may be out
    of balance).

    The returned ``equilibrium`` holds the pose, the currents and the residual force (magnetic
    plus weight) and torque there; it has no free axes (nothing was solved for) and
    ``chosen`` is True.

    Raises
    ------
    InputError
        ``gap_m`` outside the study's gap range, or a current without coils.
    """
    from fields.analysis.equilibrium import _force_torque
    from fields.analysis.poses import pose_at_gap
    from fields.errors import InputError

    st = design.study
    g = float(gap_m)
    if not (st.gap_min_m <= g <= st.gap_max_m):
        raise InputError(f"chosen point: gap {g * 1e3:.4g} mm must be inside gap_min..gap_max "
                         f"({st.gap_min_m * 1e3:.4g}..{st.gap_max_m * 1e3:.4g} mm)")
    if current_A is not None and not design.coils:
        raise InputError("chosen point: a current was given but the design has no coils")
    at = analysis.axial_curves(design, gaps_m=[g], currents_A=[0.0])
    ih = float(at.hover_current_A[0])
    drive = (ih if np.isfinite(ih) else 0.0) if current_A is None else float(current_A)
    currents = drive * at.pattern if design.coils else np.zeros(0)
    P, Rv = pose_at_gap(design, [g])
    F, T, contact = _force_torque(design, P, Rv, currents)
    if bool(contact[0]):
        raise InputError(f"chosen point: at gap {g * 1e3:.4g} mm the floater touches a body")
    gvec = np.asarray(st.gravity_m_per_s2) * design.floater.mass_kg
    eq = analysis.Equilibrium(position_m=P[0], rotvec_rad=Rv[0], currents_A=currents, gap_m=g,
                              residual_force_N=F[0] + gvec, residual_torque_Nm=T[0], free_axes=(), iterations=1)
    return OperatingPoint(equilibrium=eq, currents_A=currents, passive=False, axial_gap_m=g, drive_current_A=drive,
                          operating_gap_m=float(st.operating_gap_m),
                          hover_current_at_operating_gap_A=ih, max_current_A=float(at.max_current_A),
                          at_operating_gap=at, chosen=True)
