"""Fields of the fixed sources against closed forms built here with numpy/scipy (no magpylib)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import mu_0
from scipy.spatial.transform import Rotation

from fields.errors import InputError
from fields.input.tables import G_STANDARD
from fields.model.design import Coil, Core, Design, Floater, Magnet, Study
from fields.physics.axial import (
    CEL_CHUNK,
    axial_disc_flux_Wb,
    axial_sheets,
    cel_difference,
    sheet_disc_flux_Wb,
)
from fields.physics.coils import coil_field_per_ampere_T
from fields.physics.field_basis import fixed_field_basis, fixed_field_T
from fields.physics.kernels import shape_field_own_T
from fields.physics.magnets import magnet_field_T

#: 8 Gauss layers outside the winding: ~1e-10 relative (measured); 12 layers: ~1e-13
LAYER_RTOL = 1e-8


def thick_coil_axis_Bz(a, b, h, N, z):
    """On-axis B_z per ampere of a thick solenoid (Montgomery, Solenoid Magnet Design, 1969, ch. 1):
    B_z = (mu0 j / 2) [ (z + h/2) ln((b + sqrt(b^2 + (z+h/2)^2)) / (a + sqrt(a^2 + (z+h/2)^2)))
                      - (z - h/2) ln(... same with z - h/2 ...) ],  j = N / ((b - a) h).
    """
    j = N / ((b - a) * h)

    def term(u):
        return u * np.log((b + np.sqrt(b * b + u * u)) / (a + np.sqrt(a * a + u * u)))

    return mu_0 * j / 2 * (term(z + h / 2) - term(z - h / 2))


def test_thick_coil_on_axis_matches_montgomery():
    coil = Coil("c", 0.007, 0.022, 0.03, 2100, (0.0, 0.0, 0.025), (0.0, 0.0, 1.0), 0.5, 1.0)
    z = np.array([-0.02, 0.0, 0.005, 0.025, 0.06])  # outside, at the bore centre, above
    pts = np.column_stack((np.zeros(5), np.zeros(5), z))
    Bz = coil_field_per_ampere_T(coil, pts, layers=12)[:, 2]
    np.testing.assert_allclose(Bz, thick_coil_axis_Bz(0.007, 0.022, 0.03, 2100, z - 0.025), rtol=LAYER_RTOL)


def test_coil_off_axis_matches_biot_savart_quadrature():
    """Off-axis: Biot-Savart of the winding current density, integrated with scipy (tplquad-free
    Gauss-Legendre over r', z' and the trapezoid rule in phi' - spectrally accurate for periodic
    integrands; Trefethen & Weideman, SIAM Review 56 (2014) 385)."""
    a, b, h, N = 0.01, 0.015, 0.02, 400
    coil = Coil("c", a, b, h, N, (0.001, -0.002, 0.003), (0.0, 0.0, 1.0), 1.0, 1.0)
    x = np.array([[0.02, 0.01, 0.03], [0.0, 0.004, -0.02], [0.03, 0.0, 0.0]])
    j = N / ((b - a) * h)
    r, wr = np.polynomial.legendre.leggauss(40)
    rr, wr = a + (b - a) * (r + 1) / 2, wr * (b - a) / 2
    zz, wz = np.polynomial.legendre.leggauss(40)
    zz, wz = h * zz / 2, wz * h / 2
    phi = 2 * np.pi * np.arange(256) / 256
    R, Z, P = np.meshgrid(rr, zz, phi, indexing="ij")
    W = wr[:, None, None] * wz[None, :, None] * R * (2 * np.pi / 256)
    src = np.stack((R * np.cos(P), R * np.sin(P), Z), axis=-1) + np.array(coil.position_m)
    tang = np.stack((-np.sin(P), np.cos(P), np.zeros_like(P)), axis=-1)
    for xi, Bi in zip(x, coil_field_per_ampere_T(coil, x, layers=16)):
        d = xi - src
        dB = mu_0 / (4 * np.pi) * j * np.cross(tang, d) / np.linalg.norm(d, axis=-1, keepdims=True) ** 3
        ref = (dB * W[..., None]).sum(axis=(0, 1, 2))
        np.testing.assert_allclose(Bi, ref, rtol=1e-8, atol=1e-10 * np.linalg.norm(ref))


def cylinder_axis_Bz(R, L, J, z):
    """On-axis B_z of an axially polarized cylinder (charged discs; e.g. Furlani, Permanent Magnet
    and Electromechanical Devices, 2001, sec. 4.3): J/2 [(z+L/2)/sqrt(R^2+(z+L/2)^2) - (z-L/2)/...],
    plus J inside."""
    up, dn = z + L / 2, z - L / 2
    B = J / 2 * (up / np.hypot(R, up) - dn / np.hypot(R, dn))
    return B


def test_cylinder_and_ring_magnet_on_axis():
    m = Magnet("m", "cylinder", (0.02, 0.01), (0.0, 0.0, 1.2), (0.0, 0.0, 0.01), (np.pi, 0.0, 0.0))
    z = np.array([0.0, 0.02, 0.04, -0.03])
    pts = np.column_stack((np.zeros(4), np.zeros(4), z))
    # rotated by pi about x: polarization points -z in the world
    np.testing.assert_allclose(magnet_field_T(m, pts)[:, 2], -cylinder_axis_Bz(0.01, 0.01, 1.2, z - 0.01), rtol=1e-12)
    ring = Magnet("r", "ring", (0.01, 0.02, 0.01), (0.0, 0.0, 1.2))
    zr = np.array([0.02, -0.03])
    pr = np.column_stack((np.zeros(2), np.zeros(2), zr))
    ref = cylinder_axis_Bz(0.01, 0.01, 1.2, zr) - cylinder_axis_Bz(0.005, 0.01, 1.2, zr)
    np.testing.assert_allclose(magnet_field_T(ring, pr)[:, 2], ref, rtol=1e-12)


def test_diametral_cylinder_far_field_is_dipole_and_floater_pose_applies():
    """Far field of any uniformly magnetized body -> dipole m = J V / mu0 (Jackson 3rd ed. eq. 5.56)."""
    J = np.array([0.6, 0.0, 0.8])
    m = Magnet("m", "cylinder", (0.004, 0.004), tuple(J), (0.001, 0.0, 0.0), (0.0, 0.0, 0.5))
    pose_p, pose_r = np.array([0.0, 0.0, 0.01]), np.array([0.0, 0.3, 0.0])
    from scipy.spatial.transform import Rotation

    Rp, Rm = Rotation.from_rotvec(pose_r), Rotation.from_rotvec((0.0, 0.0, 0.5))
    centre = pose_p + Rp.apply([0.001, 0.0, 0.0])
    mvec = (Rp * Rm).apply(J) * (np.pi * 0.002**2 * 0.004) / mu_0
    x = centre + np.array([[1.0, 0.3, -0.2], [-0.4, 0.8, 1.1]])
    d = x - centre
    rn = np.linalg.norm(d, axis=1, keepdims=True)
    ref = mu_0 / (4 * np.pi) * (3 * d * (d @ mvec)[:, None] / rn**5 - mvec / rn**3)
    B = magnet_field_T(m, x, pose_p, pose_r)
    # quadrupole correction ~ (size / distance)^2 ~ 1e-5
    np.testing.assert_allclose(B, ref, rtol=5e-5, atol=5e-5 * np.abs(ref).max())


def test_sphere_and_cuboid_and_mesh():
    # sphere: exact dipole outside (Jackson sec. 5.10)
    J = np.array([0.0, 0.0, 1.0])
    s = Magnet("s", "sphere", (0.01,), tuple(J))
    x = np.array([[0.0, 0.0, 0.02], [0.015, 0.0, 0.0]])
    mvec = J * np.pi * 0.01**3 / 6 / mu_0
    rn = np.linalg.norm(x, axis=1, keepdims=True)
    ref = mu_0 / (4 * np.pi) * (3 * x * (x @ mvec)[:, None] / rn**5 - mvec / rn**3)
    np.testing.assert_allclose(magnet_field_T(s, x), ref, rtol=1e-12, atol=1e-16)
    # cuboid on its axis: charged rectangles, B_z = (J/pi) [atan(ab/(u sqrt(a^2+b^2+u^2)))]_{u=z-c}^{z+c}
    # (Furlani 2001, eq. 4.24 form with half edges a, b, c)
    a, b, c = 0.005, 0.003, 0.002
    cub = Magnet("c", "cuboid", (2 * a, 2 * b, 2 * c), (0.0, 0.0, 1.1))
    z = np.array([0.004, 0.01])

    def f(u):
        return np.arctan(a * b / (u * np.sqrt(a * a + b * b + u * u)))

    refc = 1.1 / np.pi * (f(z - c) - f(z + c))
    Bc = magnet_field_T(cub, np.column_stack((np.zeros(2), np.zeros(2), z)))
    np.testing.assert_allclose(Bc[:, 2], refc, rtol=1e-12)
    # the same cuboid as a closed outward triangle mesh gives the same outside field
    v = np.array([[sx * a, sy * b, sz * c] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)])
    from scipy.spatial import ConvexHull

    hull = ConvexHull(v)
    faces = hull.simplices.copy()
    cen = v.mean(axis=0)
    for i, f_ in enumerate(faces):  # orient outward
        nrm = np.cross(v[f_[1]] - v[f_[0]], v[f_[2]] - v[f_[0]])
        if np.dot(nrm, v[f_].mean(axis=0) - cen) < 0:
            faces[i] = f_[[0, 2, 1]]
    mesh = Magnet("m", "mesh", (), (0.0, 0.0, 1.1), mesh_vertices_m=v, mesh_faces=faces)
    xo = np.array([[0.01, 0.004, 0.006], [0.0, 0.0, 0.01]])
    np.testing.assert_allclose(magnet_field_T(mesh, xo), magnet_field_T(cub, xo), rtol=1e-9, atol=1e-13)


def _design(coils=(), magnets=(), cores=(), fl=None):
    fl = fl or Magnet("disc", "cylinder", (0.0127, 0.00635), (0.0, 0.0, 1.3))
    F = Floater("f", (fl,), 0.0, (0, 0, 0), fl.mass_kg, (0, 0, 0), ((1, 0, 0), (0, 1, 0), (0, 0, 1)))
    st = Study(0.003, 0.02, 5, "coil", (0, 0, 0), (0, 0, -1), 0.005, (0.0,), 0, 1, 0, 1, (0, 0, -G_STANDARD), 12.0)
    return Design("t (invented)", "", "tests", tuple(coils), tuple(cores), tuple(magnets), F, (), st)


def test_basis_without_cores_is_pose_independent_and_linear():
    coil = Coil("c", 0.007, 0.022, 0.03, 2100, (0, 0, 0.025), (0, 0, 1), 0.5, 1.0)
    base = Magnet("b", "cylinder", (0.02, 0.005), (0, 0, 1.0), (0, 0, 0.05))
    d = _design([coil], [base])
    pts = np.array([[[0.001, 0.0, 0.0], [0.0, 0.002, -0.01]]])
    fb1 = fixed_field_basis(d, pts, [[0, 0, 0]], [[0, 0, 0]])
    fb2 = fixed_field_basis(d, pts, [[0.01, 0, -0.02]], [[0.1, 0, 0]])
    np.testing.assert_array_equal(fb1.B0_T, fb2.B0_T)
    B = fixed_field_T(d, pts[0], [0.3])
    np.testing.assert_allclose(B, fb1.field_T([0.3])[0], rtol=1e-14)


def test_core_response_follows_demag_model_and_clips():
    """The uniform-magnetization core option (``core_model="uniform"``). A core in a uniform-ish field: J = chi_eff B_applied (chi_eff = chi/(1 + N chi)); far outside
    the core field is that of a dipole J V / mu0 (Jackson eq. 5.56). Field of a large coil at its centre."""
    coil = Coil("big", 0.3, 0.31, 0.05, 1000, (0, 0, 0), (0, 0, 1), 1.0, 100.0)
    core = Core("k", "cylinder", (0.001, 0.004), (0, 0, 0), (0, 0, 1), 1001.0, 1.6)
    far = Magnet("disc", "cylinder", (0.001, 0.001), (0, 0, 1e-12))  # negligible floater
    d = _design([coil], [], [core], fl=far)
    x = np.array([[0.0, 0.0, 0.15]])
    pose = np.array([0.0, 0.0, 1.0])
    fb = fixed_field_basis(d, x[None], pose[None], np.zeros((1, 3)), core_model="uniform")
    from fields.physics.demag import cylinder_demag_factors

    Nz = cylinder_demag_factors(0.001, 0.004)[2]
    chi = 1000.0
    # centre field of the thin big coil, Montgomery form (see test above)
    Ba = thick_coil_axis_Bz(0.3, 0.31, 0.05, 1000, 0.0)
    J = chi / (1 + Nz * chi) * Ba
    # coil-field non-uniformity over the core: ~ (core length / coil radius)^2 ~ 2e-4
    assert fb.core_Jk_T_per_A[0, 0, 0, 2] == pytest.approx(J, rel=5e-4)
    # the clipped case: at 200 A the linear J exceeds 1.6 T -> clipped, field nonlinear in current
    I = 200.0
    Jlin = I * fb.core_Jk_T_per_A[0, 0, 0, 2]
    Bc = fixed_field_T(d, x, [I], pose, core_model="uniform")
    Blin = fb.field_T([I])[0]
    Bcoil = I * coil_field_per_ampere_T(coil, x)[0, 2]
    assert Jlin > 1.6
    assert Bc[0, 2] - Bcoil == pytest.approx((Blin[0, 2] - Bcoil) * 1.6 / Jlin, rel=1e-9)
    assert fb.core_saturated[0]  # rated box |I| <= 100 A reaches 2.07 T > 1.6 T
    assert fb.saturated_at([I])[0] and not fb.saturated_at([1.0])[0]


def test_unknown_shape_message():
    with pytest.raises(InputError, match="shape must be one of cylinder, ring, cuboid, sphere, mesh"):
        shape_field_own_T("cone", (1.0,), (0, 0, 1), np.zeros((1, 3)))


# --------------------------------------------------------------------------- closed-form sheet flux (on-axis path)


def maxwell_mutual_inductance(a, rho, dz):
    """Mutual inductance of two coaxial circular loops (radii a, rho, axial distance dz):
    M = mu0 sqrt(a rho) [(2/k - k) K(k) - (2/k) E(k)], k^2 = 4 a rho / ((a + rho)^2 + dz^2)
    (Maxwell, A Treatise on Electricity and Magnetism, 1873, art. 701; Smythe, Static and Dynamic
    Electricity, 3rd ed. 1968, sec. 8.02). scipy's ellipk/ellipe take the parameter m = k^2."""
    from scipy import special

    m = 4 * a * rho / ((a + rho) ** 2 + dz**2)
    k = np.sqrt(m)
    return mu_0 * np.sqrt(a * rho) * ((2 / k - k) * special.ellipk(m) - 2 / k * special.ellipe(m))


#: (sheet radius a, half height b, disc radius rho, disc plane - sheet centre dz): inside, outside,
#: rho = a (the limit of the Pi term), rho near a, the disc inside the sheet's height, farther away
#: (not very far: Maxwell's form itself cancels like k^4 for small k)
SHEET_CASES = [(0.01, 0.015, 0.005, 0.03), (0.01, 0.015, 0.02, -0.04), (0.01, 0.015, 0.01, 0.02),
               (0.01, 0.015, 0.0099, 0.0151), (0.01, 0.015, 0.006, 0.0), (0.01, 0.015, 0.012, 0.005),
               (0.007, 0.015, 0.00635, -0.0182), (0.01, 0.002, 0.004, 0.05)]


def test_sheet_flux_matches_maxwell_mutual_inductance_integrated_over_height():
    """Flux of a sheet (K = J/mu0 A/m) through a disc = K int M(a, rho, dz - z') dz' (Maxwell's
    loop-loop mutual inductance, reference above, integrated with scipy quad)."""
    J = 1.3
    for a, b, rho, dz in SHEET_CASES:
        ref = J / mu_0 * integrate.quad(lambda zp: maxwell_mutual_inductance(a, rho, dz - zp), -b, b,
                                        points=(-0.99 * b, 0.99 * b), epsrel=1e-12, limit=400,
                                        epsabs=1e-15 * 2 * b * maxwell_mutual_inductance(a, rho, dz))[0]
        assert sheet_disc_flux_Wb(a, b, J, rho, dz) == pytest.approx(ref, rel=1e-12), (a, b, rho, dz)


def test_sheet_flux_matches_magpylib_cylinder_field_integrated_over_disc():
    """Phi = int_0^rho 2 pi r B_z(r) dr of magpylib's axially magnetized cylinder (magpylib
    Cylinder.getB, a general-purpose reference library; its kernel follows Derby and Olbert 2010 for
    B, not the vector potential used here), Gauss-Legendre in r split where the disc crosses the
    magnet's side (B_z jumps there)."""
    import magpylib as magpy

    J = 1.2
    for a, b, rho, dz in SHEET_CASES[:-1]:
        cyl = magpy.magnet.Cylinder(polarization=(0, 0, J), dimension=(2 * a, 2 * b))
        cuts = [0.0, rho] if (rho <= a or abs(dz) >= b) else [0.0, a, rho]
        ref = 0.0
        for lo, hi in zip(cuts[:-1], cuts[1:]):
            x, w = np.polynomial.legendre.leggauss(60)
            r = lo + (hi - lo) * (x + 1) / 2
            obs = np.column_stack((r, np.zeros_like(r), np.full_like(r, dz)))
            ref += float(np.sum(w * (hi - lo) / 2 * 2 * np.pi * r * cyl.getB(obs)[:, 2]))
        assert sheet_disc_flux_Wb(a, b, J, rho, dz) == pytest.approx(ref, rel=1e-12), (a, b, rho, dz)


def test_sheet_flux_thin_and_long_limits():
    # thin sheet of height 2b carrying I = 2 b K: Phi -> M I (Maxwell, above); error O(b^2), removed
    # by one Richardson step
    a, rho, dz, I = 0.01, 0.007, 0.004, 1.0
    phi = [sheet_disc_flux_Wb(a, b, mu_0 * I / (2 * b), rho, dz) for b in (2e-5, 1e-5)]
    assert (4 * phi[1] - phi[0]) / 3 == pytest.approx(maxwell_mutual_inductance(a, rho, dz) * I, rel=1e-9)
    # very long sheet: uniform field J inside, zero outside (infinite solenoid, Ampere's law), so
    # Phi -> J pi min(a, rho)^2 at its middle; end corrections ~ (a/b)^2
    for rho in (0.004, 0.015):
        assert sheet_disc_flux_Wb(0.01, 100.0, 1.0, rho, 0.0) == pytest.approx(np.pi * min(0.01, rho) ** 2, rel=1e-7)
    # odd symmetry of the antiderivative: the flux is even in dz
    assert sheet_disc_flux_Wb(0.01, 0.01, 1.0, 0.006, 0.013) == pytest.approx(
        sheet_disc_flux_Wb(0.01, 0.01, 1.0, 0.006, -0.013), rel=1e-14)


def test_cel_difference_matches_scipy_legendre_and_carlson_forms():
    """cel(kc,1,0,1) = (K - E)/m and cel(kc,p,0,p) = (1-n)/n (Pi(n,m) - K), p = 1 - n (Bulirsch 1969;
    Carlson, Numer. Algorithms 10 (1995) 13: Pi(n, m) = R_F(0,1-m,1) + n/3 R_J(0,1-m,1,1-n)), with
    scipy's ellipk/ellipe/elliprf/elliprj; blocks larger than the loop's chunk give the same values."""
    from scipy import special

    rng = np.random.default_rng(3)
    q = CEL_CHUNK + 17
    m = rng.uniform(0.05, 0.95, q)
    n = rng.uniform(0.05, 0.9, q)
    kc = np.sqrt(1 - m)
    K, E = special.ellipk(m), special.ellipe(m)
    Pi = special.elliprf(0, 1 - m, 1) + n / 3 * special.elliprj(0, 1 - m, 1, 1 - n)
    ref = (K - E) / m - (1 - n) / n * (Pi - K)
    np.testing.assert_allclose(cel_difference(kc, np.sqrt(1 - n)), ref, rtol=1e-12)
    np.testing.assert_allclose(cel_difference(kc[:5], np.sqrt(1 - n[:5])), ref[:5], rtol=1e-12)
    # P = 0 (disc radius equal to the sheet radius): the second integral's limit is 0
    np.testing.assert_allclose(cel_difference(kc[:3], np.zeros(3)), (K[:3] - E[:3]) / m[:3], rtol=1e-12)


def test_axial_sheets_of_magnets_and_coils_give_their_flux():
    """Rings (outer minus inner sheet), flipped magnets and coil layers, against magpylib's ring
    (CylinderSegment) field integrated over the disc and Maxwell's M integrated over a winding."""
    import magpylib as magpy

    ring = Magnet("r", "ring", (0.008, 0.02, 0.006), (0.0, 0.0, 1.1), (0.0, 0.0, 0.01), (np.pi, 0.0, 0.0))
    coil = Coil("c", 0.007, 0.022, 0.03, 2100, (0, 0, -0.03), (0, 0, -1), 0.5, 1.0)
    d = _design([coil], [ring])
    rho, z = np.array([0.005, 0.011]), np.array([[0.02, 0.022], [-0.0051, 0.03]])
    sh = axial_sheets(d, layers=16)
    Phi = axial_disc_flux_Wb(sh, rho, z)  # (2, 2, s)
    mag = Phi[..., sh.coil_index == -1].sum(axis=-1)
    coil_f = Phi[..., sh.coil_index == 0].sum(axis=-1)
    seg = magpy.magnet.CylinderSegment(polarization=(0, 0, 1.1), dimension=(0.004, 0.01, 0.006, 0, 360),
                                       position=(0, 0, 0.01), orientation=Rotation.from_rotvec((np.pi, 0, 0)))
    x, w = np.polynomial.legendre.leggauss(60)
    j = coil.turns / ((coil.outer_radius_m - coil.inner_radius_m) * coil.height_m)
    for i in range(2):
        for jd in range(2):
            r = rho[jd] * (x + 1) / 2
            B = seg.getB(np.column_stack((r, np.zeros_like(r), np.full_like(r, z[i, jd]))))[:, 2]
            assert mag[i, jd] == pytest.approx(float(np.sum(w * rho[jd] / 2 * 2 * np.pi * r * B)), rel=1e-11)
            # winding current density j, flowing clockwise seen from +z (axis -z): dblquad of M
            ref = -j * integrate.dblquad(lambda zc, rc: maxwell_mutual_inductance(rc, rho[jd], z[i, jd] - zc),
                                         0.007, 0.022, -0.045, -0.015, epsabs=0, epsrel=1e-12)[0]
            assert coil_f[i, jd] == pytest.approx(ref, rel=1e-10)
    with pytest.raises(InputError, match="axial_sheets: design.cores must be empty"):
        axial_sheets(_design([coil], [], [Core("k", "cylinder", (0.01, 0.02), (0, 0, 0), (0, 0, 1), 100.0, 1.5)]))


def test_coil_layers_just_below_the_winding_face_match_montgomery():
    """Observers 0.2 mm and 0.05 mm below a thin-bore winding's end face, on its axis: the
    observer-graded layers (sinh transformation, Johnston and Elliott 2005) reach the closed form
    (Montgomery 1969, above) with 10 layers, where plain Gauss layers need many more."""
    a, b, h, N = 0.0005, 0.022, 0.03, 2100
    coil = Coil("c", a, b, h, N, (0.0, 0.0, 0.0), (0.0, 0.0, 1.0), 0.5, 1.0)
    z = -h / 2 - np.array([0.0002, 0.00005])
    pts = np.column_stack((np.zeros(2), np.zeros(2), z))
    ref = thick_coil_axis_Bz(a, b, h, N, z)
    Bz = coil_field_per_ampere_T(coil, pts, layers=10)[:, 2]
    np.testing.assert_allclose(Bz, ref, rtol=1e-9)
    # the plain Gauss rule (grading switched off) is the slow one
    plain = coil_field_per_ampere_T(coil, pts, layers=10, grade_within=0.0)[:, 2]
    assert np.max(np.abs(plain - ref) / np.abs(ref)) > 1e3 * np.max(np.abs(Bz - ref) / np.abs(ref))
