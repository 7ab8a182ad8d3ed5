"""Floaters whose gap is not vertical: an offset study (gap_mode = "offset") with gravity across it.

The example geometries/radial_rings.toml is the radial stage of a horizontal-shaft bearing: two
concentric rings magnetized along z, gravity along -x, the "gap" the rotor's axial offset (any
sign). Checks against outside references:
- forces against magpylib's own force routine (``magpylib.getFT``, meshed target; a
  general-purpose library from the registry, independent of hoverfield's charge quadrature);
- the radial sag under the weight is W / k_radial to first order (Hooke's law; the six-axis
  equilibrium against the stiffness matrix at the centred pose);
- Earnshaw (1842): for rigid magnets the translational stiffness is traceless, so the rings that
  centre the rotor radially (k_x = k_y > 0) push it away axially (k_z = -2 k_x).
"""

from __future__ import annotations

import re

import magpylib as magpy
import numpy as np
import pytest
from helpers import ROOT

from fields import analysis
from fields.errors import GeometryError
from fields.input.geometry import load, loads
from fields.physics.wrench import wrench

RINGS = ROOT / "geometries" / "radial_rings.toml"


@pytest.fixture(scope="module")
def rings():
    return load(RINGS)


def test_the_offset_axis_is_the_given_direction_across_gravity(rings):
    d = rings
    assert np.allclose(d.axial, [0.0, 0.0, 1.0]) and np.allclose(d.up, [1.0, 0.0, 0.0])
    assert d.axial_load_N == 0.0  # gravity acts across the gap direction
    P, R = analysis.pose_at_gap(d, [-3e-3, 0.0, 2e-3])  # negative offsets are allowed
    assert np.allclose(P, [[0, 0, -3e-3], [0, 0, 0], [0, 0, 2e-3]], rtol=0, atol=1e-15)


def _ring(m, position):
    ri, ro, h = m.dimensions_m  # inner and outer diameters, height
    return magpy.magnet.CylinderSegment(polarization=m.polarization_T, dimension=(ri / 2, ro / 2, h, 0, 360),
                                        position=position)


@pytest.mark.parametrize("offset", [(0.0, 0.0, 2e-3), (0.0, 0.0, -3e-3), (1e-3, 0.0, 0.5e-3)])
def test_forces_match_magpylib_getFT(rings, offset):
    d = rings
    P, R = analysis.pose_at_gap(d, [offset[2]])
    P = P + np.array([offset[0], offset[1], 0.0])
    F = wrench(d, P, R, []).force_N[0]
    ref, _ = magpy.getFT(_ring(d.magnets[0], (0, 0, 0)), _ring(d.floater.magnets[0], offset), meshing=8000)
    # getFT's meshed target converges slowly (about 2e-4 at 8000 cells here)
    assert np.max(np.abs(F - ref)) <= 1e-3 * np.max(np.abs(ref))


def test_radial_sag_earnshaw_and_the_names_of_the_modes(rings):
    d = rings
    eq = analysis.find_equilibrium(d, np.zeros(0), start_gap_m=0.0)
    S0 = analysis.stiffness_matrix(d, np.zeros(3), np.zeros(3), np.zeros(0))
    kx = S0.K[0, 0]
    assert kx > 0  # the rings centre the rotor radially
    # sag along gravity (-x), first order in W / k (Hooke)
    assert eq.position_m[0] == pytest.approx(-d.weight_N / kx, rel=2e-3)
    assert abs(eq.position_m[1]) < 1e-12 and abs(eq.position_m[2]) < 1e-9
    assert S0.K[2, 2] == pytest.approx(-2 * kx, rel=1e-6)  # Earnshaw: traceless
    from fields.io.wording import mode_name

    v = analysis.stability_verdict(d, S0)
    names = {mode_name(m): m.stable for m in v.modes}
    assert names["radial x/y"] is True and names["axial z"] is False


def test_offset_mode_refusals_name_the_key():
    base = RINGS.read_text(encoding="utf-8")
    with pytest.raises(GeometryError, match=r"study\.gap_reference"):
        loads(re.sub(r'^gap_mode = "offset"$', 'gap_mode = "offset"\ngap_reference = "stator ring"', base, flags=re.M),
              "t.toml")
    plain = re.sub(r'^gap_mode = "offset"\n', "", base, flags=re.M)
    with pytest.raises(GeometryError, match=r"study\.gap_direction"):
        loads(plain, "t.toml")
    no_dir = re.sub(r'^gap_direction = .*\noffset_origin = .*\n', "", plain, flags=re.M)
    with pytest.raises(GeometryError, match=r"study\.gap_min"):  # a clearance gap must be positive
        loads(no_dir, "t.toml")


def test_the_drawing_shows_gravity_along_minus_x(rings):
    from fields.io.plots import design_picture
    from fields.studies.stages.common import close_figure

    fig = design_picture(rings)
    try:
        for ax in fig.axes[:2]:  # side section and top view: both contain x
            arrows = [c for c in ax.get_children() if type(c).__name__ == "Annotation"]
            assert len(arrows) == 1
            a = arrows[0]
            v = np.subtract(a.xy, a.xyann)
            assert v[0] < 0 and abs(v[1]) < 1e-12 * abs(v[0])  # pointing along -x
    finally:
        close_figure(fig)


def test_report_runs_without_coils_or_failures(rings, tmp_path):
    from fields.studies.stages.report import run_report

    run = run_report(rings, tmp_path, progress=False)
    assert run.stages_failed == {}
    html = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert "radial x/y" in html and "axial z" in html and "Coil datasheet" not in html
    assert "uniformly magnetized equivalent" not in html


def test_curves_command_words_a_design_without_coils(tmp_path, capsys):
    from fields.cli import main

    assert main(["curves", str(RINGS), "-o", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "gravity acts across the gap direction" in out
    assert "no coils (no hover current); axial force 0 N" in out and "nan" not in out
