"""Validation of the independent axisymmetric finite-element reference (tests/fe_reference) and
checks of the reference data it stored (tests/reference_data/fe_*.json).

Sources of each check are named beside it. Tolerances:
- ``FE_TOL_REL = 1e-4``: the accuracy the reference data promise at the fine mesh level.
- ``DOMAIN_TOL_REL = 1e-6``: the effect of the 2 m outer boundary (image sources beyond the
  flux-tight wall decay as (L/R)^4 in the force, L ~ 5 cm here).
"""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest

from fields.input.geometry import load
from fields.physics.wrench import wrench

from fe_reference.analytic import coil_magnet_flux_linkage_Wb, image_force_N, sphere_coil_force_N
from fe_reference.cases import coil_only_sphere_case, design_case, slab_image_case
from fe_reference.make import SPEC, richardson
from fe_reference.material import FrohlichKennelly
from fe_reference.solver import Model
from helpers import ROOT, SUSPENSION

FE_TOL_REL = 1e-4
DOMAIN_TOL_REL = 1e-6
REFERENCE_FILES = ("suspension", "short_wide_core", "sphere")
DATA = ROOT / "tests" / "reference_data"


# --------------------------------------------------------------------------- fast checks


def test_frohlich_kennelly_inverse_satisfies_the_curve():
    """h_of_b inverts B = mu0 H + J(H) with the Frohlich-Kennelly J(H) (Frohlich 1881, Kennelly
    1891, from memory): J = chi mu0 H / (1 + chi mu0 H / Js); low-field slope 1/mu_r; J -> Js."""
    mat = FrohlichKennelly(1000.0, 1.6)
    b = np.array([1e-6, 0.1, 1.0, 1.5, 1.7, 2.0, 3.0, 10.0])
    h, dh = mat.h_of_b(b)
    assert np.allclose(h + mat.polarization_T(h), b, rtol=1e-13, atol=0)
    eps = 1e-7 * b
    fd = (mat.h_of_b(b + eps)[0] - mat.h_of_b(b - eps)[0]) / (2 * eps)
    assert np.allclose(dh, fd, rtol=1e-6)
    # low-field slope: dh/db -> 1/mu_r (the correction is O(chi b / Js), 6e-10 at b = 1e-12 T)
    assert math.isclose(mat.h_of_b(1e-12)[1], 1.0 / 1000.0, rel_tol=1e-8)
    # far above saturation the polarization approaches Js (h = b - J, J -> Js)
    assert math.isclose(b[-1] - h[-1], 1.6, rel_tol=2e-2)


@pytest.mark.parametrize("name", REFERENCE_FILES)
def test_reference_file_schema_and_provenance(name):
    """The stored reference files have the agreed schema, provenance and consistent shapes."""
    path = DATA / f"fe_{name}.json"
    rec = json.loads(path.read_text())
    assert rec["case"] == name
    prov = rec["provenance"]
    for key in ("method", "mesh_levels", "scikit_fem_version", "date", "regenerate", "error_estimate",
                "newton_tolerance", "convergence"):
        assert prov[key], key
    assert prov["regenerate"].startswith("python -m tests.fe_reference.make")
    assert len(prov["mesh_levels"]) >= 2
    assert rec["bh"]["model"] == "frohlich-kennelly" and rec["bh"]["mu_r"] > 1 and rec["bh"]["Js_T"] > 0
    ng, ni = len(rec["gaps_m"]), len(rec["currents_A"])
    for key in ("Fz_N", "Fz_error_N", "flux_linkage_Wb", "Fz_linear_N"):
        a = np.asarray(rec[key], dtype=float)
        assert a.shape == (ng, ni), key
        assert np.all(np.isfinite(a)), key
    err = np.asarray(rec["Fz_error_N"])
    F = np.asarray(rec["Fz_N"])
    assert np.all(err >= 0)
    # the promised accuracy: error estimates below FE_TOL_REL of the table's force scale
    assert np.all(err <= FE_TOL_REL * np.abs(F).max())
    geo = rec["geometry"]
    if "file" in geo:
        assert (ROOT / geo["file"]).is_file()
        assert load(ROOT / geo["file"]).invented
    else:
        assert geo["invented"] is True and "INVENTED EXAMPLE" in geo["note"]


def test_stored_linear_iron_force_is_quadratic_in_current():
    """Without saturation the stored linear-iron force is quadratic in the current,
    F = F0 + F1 I + F2 I^2 (B is linear in the sources; the stress is quadratic in B)."""
    rec = json.loads((DATA / "fe_suspension.json").read_text())
    I = np.asarray(rec["currents_A"])
    F = np.asarray(rec["Fz_linear_N"])
    err = np.asarray(rec["Fz_linear_error_N"])
    V = np.vander(I, 3)
    for g in range(F.shape[0]):
        coef, *_ = np.linalg.lstsq(V, F[g], rcond=None)
        assert np.all(np.abs(V @ coef - F[g]) <= 10 * err[g].max() + 1e-9)


# --------------------------------------------------------------------------- validation (slow)


def _suspension_parts(gap_m, level, spec=SPEC):
    d = load(SUSPENSION)
    m = Model(design_case(d, gap_m, cores=False), level, spec)
    Am, Ac = m.linear_parts()
    return m, Am, Ac[0]


@pytest.mark.slow
@pytest.mark.parametrize("gap_m", [0.005, 0.015])
def test_core_free_force_matches_hoverfield(gap_m):
    """Magnet + coil without the core: FE force at the fine level (2) against hoverfield's
    `wrench` (surface charges and the closed-form cap flux of the coil's solenoid sheets; the
    project's force tests hold it to 1e-7 against elliptic-integral references)."""
    d = load(SUSPENSION)
    d0 = dataclasses.replace(d, cores=())
    P = d0.study.floater_origin_m([gap_m])
    m, Am, Ac = _suspension_parts(gap_m, 2)
    for I in (0.4, 1.2, -0.4):
        ref = wrench(d0, P, np.zeros(3), [I], order="reference").force_N[0, 2]
        F = m.forces_N(Am + I * Ac)
        assert abs(F[0] - ref) <= FE_TOL_REL * abs(ref), (I, F, ref)
        assert abs(F[1] - ref) <= FE_TOL_REL * abs(ref), (I, F, ref)


@pytest.mark.slow
def test_outer_boundary_is_far_enough():
    """Doubling the 2 m domain (with the same nodes inside 2 m) changes the force by less than
    DOMAIN_TOL_REL: the flux-tight wall acts through image sources whose force on the floater
    decays as (L/R)^4."""
    F = []
    for R in (2.0, 4.0):
        spec = dataclasses.replace(SPEC, domain_m=R, inner_domain_m=2.0 if R > 2.0 else None)
        m, Am, Ac = _suspension_parts(0.015, 0, spec)
        F.append(m.forces_N(Am + 0.8 * Ac)[0])
    assert abs(F[1] - F[0]) <= DOMAIN_TOL_REL * abs(F[1]), F


@pytest.mark.slow
def test_flux_linkage_of_the_magnet_by_reciprocity():
    """The magnet's flux linkage with the coil, psi = int M . B_coil(1 A) dV (reciprocity,
    e.g. Furlani 2001 sec. 4.5; coil field from magpylib loops), against the FE psi."""
    d = load(SUSPENSION)
    case = design_case(d, 0.010, cores=False)
    m, Am, Ac = _suspension_parts(0.010, 1)
    psi_fe = m.flux_linkages_Wb(Am)[0]
    mag = case.magnets[0]
    ref = coil_magnet_flux_linkage_Wb(case.coils[0].shape.box(), case.coils[0].turns, mag.shape.box(), mag.Jz_T)
    assert abs(psi_fe - ref) <= FE_TOL_REL * abs(ref), (psi_fe, ref)


@pytest.mark.slow
@pytest.mark.parametrize("mu_r", [1000.0, 4.0])
def test_magnet_over_permeable_half_space_matches_image_method(mu_r):
    """Cylinder magnet 3 mm above a permeable half space: FE against the image method (image
    polarization scaled by (mu_r - 1)/(mu_r + 1); Jackson 3rd ed. sec. 4.4 by analogy, Furlani
    2001 sec. 3.6), the force between magnet and image by surface charges with magpylib's field.
    Three levels: the fine level within FE_TOL_REL, and the Richardson estimate of levels 0, 1
    bounds the actual error of the extrapolated value."""
    spec = dataclasses.replace(SPEC, near_m=0.02)
    ref = image_force_N(0.0127, 0.00635, 1.3, 0.003, mu_r)
    case = slab_image_case(0.0127, 0.00635, 1.3, 0.003, FrohlichKennelly(mu_r))
    F = []
    for L in (0, 1, 2):
        m = Model(case, L, spec)
        F.append(m.forces_N(m.linear_parts()[0])[0])
    assert abs(F[2] - ref) <= FE_TOL_REL * abs(ref), (F, ref)
    FR, est = richardson(F[0], F[1])
    assert abs(FR - ref) <= est, (FR, est, ref)


@pytest.mark.slow
def test_permeable_sphere_under_coil_matches_multipole_solution():
    """Linear iron ball (mu_r = 1000) 6 mm under an iron-free coil: FE (mapped sphere mesh,
    quadratic geometry) against the Legendre-series solution for a permeable sphere in an
    axisymmetric applied field (Jackson 3rd ed. sec. 3.3 and 5.11)."""
    mu_r = 1000.0
    case = coil_only_sphere_case(0.006, FrohlichKennelly(mu_r))
    c, sp = case.coils[0], case.irons[0].shape
    ref = sphere_coil_force_N(c.shape.box(), c.turns, 1.0, sp.z_centre, sp.radius, mu_r)
    assert ref > 0  # attraction towards the coil
    m = Model(case, 2, SPEC)
    F = m.forces_N(m.linear_parts()[1][0])[0]
    assert abs(F - ref) <= FE_TOL_REL * ref, (F, ref)


@pytest.mark.slow
def test_mesh_convergence_with_saturating_core():
    """Suspension design with its Frohlich-Kennelly core, 10 mm gap, 1.2 A: three nested levels.
    Observed rate near 4 (quadratic elements, energy-type functional: Ciarlet, The Finite Element
    Method for Elliptic Problems, 1978, sec. 3.2 with the Aubin-Nitsche duality argument), the
    Richardson estimate of the fine level below FE_TOL_REL, the table scheme (levels 0 and 1,
    rate 4) bounded by its own estimate, and Newton converging quadratically (Kantorovich)."""
    d = load(SUSPENSION)
    case = design_case(d, 0.010, FrohlichKennelly(1000.0, 1.6))
    F, last = [], None
    for L in (0, 1, 2):
        m = Model(case, L, SPEC)
        s = m.solve([1.2])
        F.append(m.forces_N(s.A)[0])
        last = s
    d1, d2 = F[1] - F[0], F[2] - F[1]
    rate = math.log2(abs(d1 / d2))
    assert 3.0 <= rate <= 6.0, (F, rate)
    est = abs(d2) / (2**rate - 1)
    assert est <= FE_TOL_REL * abs(F[2])
    FR, est01 = richardson(F[0], F[1])
    assert abs(FR - F[2]) <= est01 + est
    h = last.update_history
    assert h[-1] <= 1e-10 and h[-1] <= 10 * h[-2] ** 1.5, h


@pytest.mark.slow
def test_stored_suspension_point_regenerates():
    """One stored point of fe_suspension.json (10 mm, 0.8 A) is reproduced by a fresh solve
    within its stored error estimate (the data match their generator)."""
    rec = json.loads((DATA / "fe_suspension.json").read_text())
    g, i = rec["gaps_m"].index(0.010), rec["currents_A"].index(0.8)
    bh = rec["bh"]
    case = design_case(load(ROOT / rec["geometry"]["file"]), 0.010, FrohlichKennelly(bh["mu_r"], bh["Js_T"]))
    F = [Model(case, L, SPEC).forces_N(Model(case, L, SPEC).solve([0.8]).A)[0] for L in (0, 1)]
    FR, _ = richardson(F[0], F[1])
    assert abs(FR - rec["Fz_N"][g][i]) <= max(rec["Fz_error_N"][g][i], 1e-9)
