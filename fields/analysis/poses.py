"""Floater poses: the gap axis, generalized displacements about the centre of mass, drive patterns.

Sign conventions used by every analysis module
----------------------------------------------
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

import numpy as np
from scipy.spatial.transform import Rotation

from fields.model.design import Design
from fields.physics.checks import input_error

#: the generalized coordinates: translations of the centre of mass, rotations about it
AXES = ("x", "y", "z", "rx", "ry", "rz")


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
        raise input_error("drive_pattern", "pattern", f"{k} numbers, one per coil", d.tolist())
    return d


def floater_size_m(design: Design) -> float:
    """A length scale of the floater (m): the largest dimension of its magnets and soft iron."""
    s = max((max(p.dimensions_m) for p in design.floater.soft_iron), default=0.0)
    for m in design.floater.magnets:
        if m.shape == "mesh":
            s = max(s, float(np.ptp(m.mesh_vertices_m, axis=0).max()))
        else:
            s = max(s, max(m.dimensions_m))
    return s
