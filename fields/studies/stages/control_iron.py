"""The control stage for a soft-iron (ball) floater: the single-axis route along the axis.

The pull on induced iron is not affine in current, so the force table along the control axis is
a grid ``F(s, I)`` (:class:`fields.control.force_grid.GridForceTable`) from the floater's axial
family (the joint cell solve, :mod:`fields.physics.iron_floater`); ``k_i`` and the back-EMF
coefficient are ``dF/dI`` at the current in question. The plant, the PD/PID starting point, its
margins, the nonlinear simulations, the capture band and the on/off study are those of the
single-axis route (:mod:`fields.studies.stages.control`). The multi-axis layer needs forces at
off-axis poses, which the soft-iron model does not compute: it is not run, and the report says
so. A ball that is unstable sideways (a negative frozen-polarization stiffness, which bounds the
true one from above) is refused by name.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from fields import analysis
from fields.model.design import Design

#: currents of the force grid: this many from -max to +max current (the simulations clip there)
GRID_CURRENTS = 13
#: positions of the force grid along the axis
GRID_POSITIONS = 81


def _grid_table(design: Design, eq, ax, I0: float):
    """GridForceTable along the vertical axis over the study's gap range, the poses and the s grid."""
    from fields.control.force_grid import GridForceTable

    st = design.study
    c = float(design.axial @ np.asarray(st.gap_direction))  # d gap / d s
    s_a, s_b = (st.gap_min_m - eq.gap_m) / c, (st.gap_max_m - eq.gap_m) / c
    s = np.linspace(min(s_a, s_b), max(s_a, s_b), GRID_POSITIONS)
    gaps = eq.gap_m + c * s
    imax = float(max(abs(k.max_current_A) for k in design.coils))
    cur = np.linspace(-imax, imax, GRID_CURRENTS)
    o = np.argsort(gaps)
    curves = analysis.axial_curves(design, gaps_m=gaps[o], currents_A=cur)
    F = np.empty((s.size, cur.size))
    F[o] = curves.Fup_N * float(np.sign(ax.direction @ design.axial) or 1.0)
    ok = np.empty(s.size, dtype=bool)
    ok[o] = ~curves.contact
    i0 = int(np.argmin(np.abs(s)))
    lo = hi = i0
    while lo > 0 and ok[lo - 1]:
        lo -= 1
    while hi < s.size - 1 and ok[hi + 1]:
        hi += 1
    sl = slice(lo, hi + 1)
    dq = np.zeros((s.size, 6))
    dq[:, :3] = s[:, None] * ax.direction[None, :]
    P, Rv = analysis.displace(design, eq.position_m, eq.rotvec_rad, dq)
    return GridForceTable(s[sl], cur, F[sl], I0), (P[sl], Rv[sl]), s[sl]


def soft_iron_control(design: Design, out: Path, stability, coil, switch: str, with_capture: bool):
    """:func:`fields.studies.stages.control.run_control` for a soft-iron floater (module notes)."""
    from fields.control.multiaxis.plant import coil_resistances
    from fields.devices.inductance import mutual_inductance_matrix
    from fields.io.export import write_json
    from fields.studies.stages.common import file_list
    from fields.studies.stages.control import (ControlResult, _axis_fields, _axis_pieces, _Drive, _refused_result,
                                               _single_axis, _write_on_off, single_loop_line)
    from fields.studies.stages.control_switch import on_off_lines, switch_study

    eq = stability.equilibrium_point
    ax = analysis.control_axis(design, stability.stiffness)
    K = np.diag(stability.stiffness.K)
    if ax.index != 2 or K[0] < 0 or K[1] < 0:
        why = ("the ball is unstable sideways: its frozen-polarization stiffness, an upper bound of the true one, "
               f"is {min(K[0], K[1]):.3g} N/m" if min(K[0], K[1]) < 0 else f"the control axis is {ax.name}")
        return _refused_result(design, out, {"reasons": [f"soft-iron floater: {why}; the single-axis route holds "
                                                         "the vertical axis only"],
                                             "fix": ["a shorter gap or a core pole that focuses the field on the axis"],
                                             "modes": ["sideways x/y"]}, None)
    p = np.asarray(ax.pattern, float)
    I0v = np.asarray(eq.currents_A, float)
    I0 = float(I0v @ p / (p @ p)) if np.any(p) else 0.0
    Rh, Rc, _, _ = coil_resistances(design, I0v)
    L = np.asarray(coil.inductance_matrix_H, float) if coil is not None else mutual_inductance_matrix(
        design, currents_A=I0v, gap_m=eq.gap_m)
    active = np.flatnonzero(p)
    drv = _Drive(float(np.sum(p[active] ** 2 * Rh[active])), float(np.sum(p[active] ** 2 * Rc[active])),
                 float(p @ L @ p), float(min(abs(design.coils[k].max_current_A) / abs(p[k]) for k in active)))
    table, poses, s_grid = _grid_table(design, eq, ax, I0)
    pieces = _axis_pieces(design, eq, ax, None, drv, (table, I0, poses, s_grid))
    sa, files, extra = _single_axis(design, out, pieces)
    st = None
    if with_capture:
        st = switch_study(design, ax, pieces.params, pieces.plant, table, pieces.sensor, pieces.gain_per_m,
                          switch=switch, linear_run=None, axis_index=None, coil_resistances_ohm=Rh)
        files += _write_on_off(design, out, st)
    lines = [f"{design.name}: soft-iron floater - single loop along the {ax.name} axis (the multi-axis layer "
             "needs off-axis forces, which the soft-iron model does not compute)",
             f"  k_i = dF/dI at the bias current {I0:.4g} A: {ax.force_per_ampere_N_per_A:.4g} N/A (the pull grows "
             "about with the current's square); back-EMF coefficient the same dF/dI",
             single_loop_line(sa)] + on_off_lines(st)
    r = ControlResult(status="closable", route="single-axis", summary=tuple(lines), single_axis=sa, on_off=st,
                      **_axis_fields(pieces), files=file_list(out, "control.json", *files), plant=pieces.plant,
                      raw_plant=pieces.raw_plant, table=table, params=pieces.params, outcome=None, **extra)
    write_json(out / "control.json", r)
    return r
