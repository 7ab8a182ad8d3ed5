"""Tests of fields.control (control model of one axis: plant, design, margins, simulation).

Invented test plant (not a real device): a floater of 11 g hanging under an air-core coil,
force F(s, I) = I c / (d0 - s)^4 (dipole-like fall-off, no permanent-magnet force), hover
current 0.4 A, coil 20 ohm / 0.15 H, 24 V supply, sensor 1000 V/m. Its linearisation is known
in closed form: k_i = c/d0^4, k_s = -4 I0 c/d0^5; d0 and c are chosen so k_s = -20 N/m and
I0 k_i = m g.
"""

from __future__ import annotations

import math

import control
import numpy as np
import pytest

from fields.control.circuits import E_SERIES, SecondStage, analog_lead_network, e_series, snap_to_e_series
from fields.control.design import Discretisation, design_controller
from fields.control.margins import loop_margins, loop_transfer, proportional_only
from fields.input.tables import G_STANDARD
from fields.control.plant import ForceTable, PlantParameters, linear_plant
from fields.control.simulate import Outcome, Scenario, simulate
from fields.control.studies import capture_range, hysteresis_study
from fields.errors import ContactError, InputError, SolverError

G = G_STANDARD  # standard gravity, 9.80665 m/s^2 (3rd CGPM, 1901)
M_KG = 0.011
I0_A = 0.4
KS_N_PER_M = -20.0
KI_N_PER_A = M_KG * G / I0_A  # hover balance I0 k_i = m g
D0_M = 4 * M_KG * G / -KS_N_PER_M  # from k_s = -4 I0 k_i / d0
C_FORCE = KI_N_PER_A * D0_M**4
S_TABLE_M = np.linspace(-0.010, 0.010, 201)
T_S = 1e-3  # 1 kHz sampling, 2.5x the plant's minimum rate (407 Hz)

#: tolerance for quantities computed two ways in floating point (eigenvalues, polynomial roots)
TIGHT = 1e-9
#: Nyquist/margin numbers are refined by brentq to ~1e-12; python-control's own solvers agree to
#: about 1e-6 relative
MARGIN_RTOL = 1e-5


def make_params(**over) -> PlantParameters:
    kw = dict(axis_name="vertical", mass_kg=M_KG, stiffness_N_per_m=KS_N_PER_M,
              force_per_ampere_N_per_A=KI_N_PER_A, resistance_ohm=20.0, inductance_H=0.15,
              hover_current_A=I0_A, max_current_A=1.0, supply_voltage_V=24.0,
              sensor_gain_per_m=1000.0, sensor_crosstalk_per_A=0.0, sensor_unit="V")
    kw.update(over)
    return PlantParameters(**kw)


def make_table() -> ForceTable:
    fk = C_FORCE / (D0_M - S_TABLE_M) ** 4
    return ForceTable(S_TABLE_M, np.zeros_like(S_TABLE_M), fk)


@pytest.fixture(scope="module")
def params():
    return make_params()


@pytest.fixture(scope="module")
def table():
    return make_table()


# ------------------------------------------------------------------------------------------
# E-series
# ------------------------------------------------------------------------------------------

# IEC 60063:2015, "Preferred number series for resistors and capacitors", table 1 (E6, E12, E24
# two-significant-figure values), typed here from the published table.
IEC_E12 = [10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82]
IEC_E24 = [10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91]
IEC_E6 = [10, 15, 22, 33, 47, 68]


def test_e_series_against_iec60063():
    assert [round(10 * v) for v in e_series("E12")] == IEC_E12
    assert [round(10 * v) for v in e_series("E24")] == IEC_E24
    assert [round(10 * v) for v in e_series("E6")] == IEC_E6
    # Renard-type construction behind the standard: value i of En is 10^(i/n) rounded to two
    # figures, with the published historical deviations (E24: 2.7 ... 4.7 and 8.2 run up to
    # about 4.5 % from the geometric value; IEC 60063 annex). Check every value within 5 %.
    for name, n in (("E6", 6), ("E12", 12), ("E24", 24)):
        geo = 10 ** (np.arange(n) / n)
        assert np.all(np.abs(np.asarray(E_SERIES[name]) / geo - 1) < 0.05)


def test_snap_picks_log_nearest_value():
    # 4.6 k lies between 3.9 k and 4.7 k of E12 (IEC 60063); 4.7 k is nearer on a log scale
    assert snap_to_e_series(4.6e3, "E12") == 4700.0
    assert snap_to_e_series(9.6e-9, "E12") == pytest.approx(1.0e-8)  # wraps to the next decade
    assert snap_to_e_series(12.4, "E24") == 12.0
    with pytest.raises(InputError, match="snap_to_e_series: value must be a positive finite number"):
        snap_to_e_series(-1.0)


def test_analog_network_values_realise_targets():
    net = analog_lead_network(48.0, 340.0, 0.28, 12.0)
    allowed_r = set(IEC_E24)
    allowed_c = set(IEC_E12)
    for r in (net.R1_ohm, net.R2_ohm, net.R3_ohm, net.Ra_ohm, net.Rb_ohm):
        assert round(r / 10 ** (math.floor(math.log10(r)) - 1)) in allowed_r
    for c in (net.C1_F, net.Cb_F):
        assert round(c / 10 ** (math.floor(math.log10(c)) - 1)) in allowed_c
    # independent circuit analysis with python-control: stage 1 = -R2 / (R3 + R1 || C1)
    R1, R2, R3, C1 = net.R1_ohm, net.R2_ohm, net.R3_ohm, net.C1_F
    s = control.tf("s")
    H = R2 / (R3 + R1 / (1 + s * R1 * C1))
    zeros, poles = H.zeros(), H.poles()
    assert -zeros[0].real == pytest.approx(net.zero_rad_per_s, rel=TIGHT)
    assert -poles[0].real == pytest.approx(net.pole_rad_per_s, rel=TIGHT)
    assert H.dcgain() == pytest.approx(net.dc_gain_V_per_V, rel=TIGHT)
    # E24 steps are <= 10 %, so snapping each part moves a corner by at most ~5-10 %
    assert net.max_relative_error < 0.1
    assert abs(net.zero_rad_per_s / 48.0 - 1) <= net.max_relative_error + TIGHT
    assert abs(net.integral_zero_rad_per_s / 12.0 - 1) <= net.max_relative_error + TIGHT
    assert net.second_stage == SecondStage.PI
    assert analog_lead_network(48.0, 340.0, 0.28).second_stage == SecondStage.UNITY_BUFFER


# ------------------------------------------------------------------------------------------
# Plant
# ------------------------------------------------------------------------------------------


def test_current_drive_poles_textbook(params):
    # Franklin, Powell & Emami-Naeini, Feedback Control of Dynamic Systems, magnetic levitation
    # example: m x'' = k_x x + k_i i, poles +-sqrt(k_x/m) (k_x = -k_s). Own numbers (the book's
    # example values are not used).
    plant = linear_plant(params, "current")
    p = math.sqrt(-KS_N_PER_M / M_KG)
    assert np.sort(plant.poles_rad_per_s.real) == pytest.approx([-p, p], rel=TIGHT)
    assert np.all(plant.poles_rad_per_s.imag == 0)
    assert plant.unstable_pole_rad_per_s == pytest.approx(p, rel=TIGHT)
    assert plant.unstable_time_constant_s == pytest.approx(1 / p, rel=TIGHT)
    assert plant.unstable_pole_count == 1
    # Y/I = G_s k_i / (m (s^2 - p^2)): DC gain -G_s k_i/(m p^2) = G_s k_i / k_s
    assert control.dcgain(plant.tf) == pytest.approx(1000.0 * KI_N_PER_A / KS_N_PER_M, rel=TIGHT)


def test_voltage_drive_poles_characteristic_polynomial(params):
    # Characteristic polynomial of m s'' = -k_s s + k_i i, L i' = -R i - k_i s' + u (back-EMF by
    # reciprocity, Woodson & Melcher, Electromechanical Dynamics, 1968, Part I ch. 3):
    # (s + R/L)(s^2 + k_s/m) + k_i^2 s/(m L) = 0, derived by hand here.
    plant = linear_plant(params, "voltage")
    m, ks, ki, R, L = M_KG, KS_N_PER_M, KI_N_PER_A, 20.0, 0.15
    ref = np.roots([1.0, R / L, ks / m + ki**2 / (m * L), R * ks / (m * L)])
    assert np.sort_complex(plant.poles_rad_per_s) == pytest.approx(np.sort_complex(ref), rel=TIGHT)
    assert plant.electrical_pole_rad_per_s == pytest.approx(R / L, rel=TIGHT)
    # back-EMF damping moves the unstable pole just below sqrt(-k_s/m)
    assert 0 < plant.unstable_pole_rad_per_s < math.sqrt(-ks / m)
    # without coupling (k_i -> 0) the poles are +-sqrt(-k_s/m) and -R/L exactly
    weak = linear_plant(make_params(force_per_ampere_N_per_A=1e-9), "voltage")
    assert np.sort(weak.poles_rad_per_s.real) == pytest.approx(
        [-R / L, -math.sqrt(-ks / m), math.sqrt(-ks / m)], rel=1e-9)


def test_transfer_function_matches_state_space(params):
    # reference: python-control's own state-space -> transfer-function conversion
    for drive, gi in (("voltage", 0.0), ("voltage", 3.0), ("current", 2.0)):
        plant = linear_plant(make_params(sensor_crosstalk_per_A=gi), drive)
        ref = control.ss2tf(plant.ss)
        w = np.array([1.0, 30.0, 300.0])
        assert plant.tf(1j * w) == pytest.approx(ref(1j * w), rel=1e-10)


def test_transfer_function_keeps_the_model_structure(params):
    # The voltage-driven plant without crosstalk has the constant numerator G_s k_i/(m L) over a
    # cubic (Franklin, Powell & Emami-Naeini, magnetic levitation example, with the coil's
    # electrical pole): relative degree 3. python-control's ss2tf (0.10.2, no slycot) returns
    # round-off s^2 and s terms in the numerator; this is why the plant's polynomials are
    # written out. If this check starts to fail, ss2tf has become exact here and can replace them.
    plant = linear_plant(params, "voltage")
    m, ki, L = M_KG, KI_N_PER_A, 0.15
    assert plant.numerator == pytest.approx([1000.0 * ki / (m * L)], rel=TIGHT)
    assert plant.denominator.size == 4
    pc_num = np.trim_zeros(np.asarray(control.ss2tf(plant.ss).num[0][0], float), "f")
    assert pc_num.size > plant.numerator.size


def test_plant_design_rules(params):
    # omega_c = 3 p (common practice), f_s = 20 f_c (Franklin, Powell & Workman 1998, ch. 11,
    # recalled from memory), delay budget PM/3 at crossover (common practice, no source)
    plant = linear_plant(params, "current")
    wc = 3 * plant.unstable_pole_rad_per_s
    assert plant.nominal_crossover_rad_per_s == pytest.approx(wc, rel=TIGHT)
    assert plant.min_sample_rate_Hz == pytest.approx(20 * wc / (2 * math.pi), rel=TIGHT)
    assert plant.max_loop_delay_s == pytest.approx(math.radians(45) / 3 / wc, rel=TIGHT)


def test_table_linearisation_matches_closed_form(table):
    # F = I c/(d0 - s)^4: dF/ds = 4 I c/(d0 - s)^5, so k_s = -4 I0 c/d0^5, k_i = c/d0^4
    ks, ki = table.linearise(0.0, I0_A)
    # cubic spline derivative error O(h^3) with h/d0 ~ 0.005
    assert ks == pytest.approx(KS_N_PER_M, rel=1e-6)
    assert ki == pytest.approx(KI_N_PER_A, rel=1e-10)
    assert table.hover_current_A(M_KG, G) == pytest.approx(I0_A, rel=1e-12)


def test_input_errors():
    with pytest.raises(InputError, match=r"PlantParameters: mass_kg must be a positive finite number; got 0"):
        make_params(mass_kg=0.0)
    with pytest.raises(InputError, match=r"linear_plant: drive must be one of 'voltage', 'current'; got pwm"):
        linear_plant(make_params(), "pwm")
    with pytest.raises(InputError, match=r"ForceTable: positions_m must be strictly increasing"):
        ForceTable(np.array([0.0, 1.0, 1.0, 2.0]), np.zeros(4), np.ones(4))
    assert make_params(axis_name="lateral x").gravity_m_per_s2 == 0.0
    assert make_params().gravity_m_per_s2 == G


# ------------------------------------------------------------------------------------------
# Controller and margins
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("drive", ["current", "voltage"])
@pytest.mark.parametrize("kind", ["pd", "pid"])
def test_design_meets_crossover_and_phase_margin(params, drive, kind):
    plant = linear_plant(params, drive)
    c = design_controller(plant, kind=kind)  # analog design: continuous loop, no hold
    L = loop_transfer(plant, c)
    wc = c.crossover_rad_per_s
    assert wc == pytest.approx(3 * plant.unstable_pole_rad_per_s, rel=TIGHT)
    assert abs(L(1j * wc)) == pytest.approx(1.0, rel=1e-9)
    # python-control's stability_margins: phase margin at the gain crossover
    gm, pm, sm, wpc, wgc, wms = control.stability_margins(L, returnall=True)
    assert pm[np.argmin(np.abs(wgc - wc))] == pytest.approx(45.0, abs=1e-6)
    # parallel gains reproduce the series lead (x PI) form
    s = control.tf("s")
    series = c.sign * c.lead_gain * (1 + s / c.zero_rad_per_s) / (1 + s / c.pole_rad_per_s)
    if kind == "pid":
        series = series * (s + c.integral_zero_rad_per_s) / s
    w = np.array([3.0, 50.0, 700.0])
    assert c.tf(1j * w) == pytest.approx(series(1j * w), rel=1e-10)


def test_tustin_prewarp_keeps_crossover_response(params):
    # Pre-warped bilinear transform maps s = j w_c exactly to z = exp(j w_c T) (Franklin, Powell
    # & Workman, Digital Control of Dynamic Systems, 1998, sec. 6.3.2 "bilinear with pre-warping")
    c = design_controller(linear_plant(params, "current"), sample_time_s=T_S)
    wc = c.crossover_rad_per_s
    assert c.discrete_tf(np.exp(1j * wc * T_S)) == pytest.approx(c.tf(1j * wc), rel=1e-9)
    assert c.discrete_denominator[0] == 1.0
    assert c.discretisation == Discretisation.TUSTIN_PREWARP and c.prewarp_frequency_rad_per_s == wc


@pytest.mark.parametrize("drive,kind,T", [("current", "pd", None), ("current", "pid", None),
                                          ("voltage", "pd", None), ("current", "pd", T_S),
                                          ("voltage", "pd", T_S), ("current", "pd", 2e-3)])
def test_margins_against_python_control(params, drive, kind, T):
    plant = linear_plant(make_params(sensor_crosstalk_per_A=0.05), drive)
    c = design_controller(plant, sample_time_s=T, kind=kind, loop_delay_s=0.0)
    mg = loop_margins(plant, c)
    L = mg.loop
    # closed-loop poles: control.feedback
    ref = control.feedback(L, 1).poles()
    assert np.sort_complex(mg.closed_loop_poles) == pytest.approx(np.sort_complex(ref), rel=1e-7, abs=1e-9)
    assert mg.stable
    # Nyquist count: python-control counts clockwise encirclements (N = Z - P), ours
    # counter-clockwise; for a stable loop ours equals the open-loop unstable pole count
    assert mg.open_loop_unstable_poles == 1
    assert mg.encirclements_ccw == 1
    cnt = control.nyquist_response(L, warn_encirclements=False, warn_nyquist=False).count
    assert mg.encirclements_ccw == -cnt
    # phase margin: control.stability_margins
    gm, pm, sm, wpc, wgc, wms = control.stability_margins(L, returnall=True)
    assert mg.phase_margin_deg == pytest.approx(np.min(pm), rel=MARGIN_RTOL)
    # gain interval ends are gain margins python-control finds at phase crossovers (it may miss
    # one of them; each finite end we report must be among them or be checked by poles below)
    k_low, k_high = mg.gain_interval
    assert 0 < k_low < 1 < k_high
    assert np.min(np.abs(np.asarray(gm) / k_low - 1)) < MARGIN_RTOL
    # the interval is exactly where control.feedback(k L) is stable
    for k, stable in ((0.98 * k_low, False), (1.02 * k_low, True), (1.0, True)):
        poles = control.feedback(k * L, 1).poles()
        assert (np.all(np.abs(poles) < 1) if L.isdtime(strict=True) else np.all(poles.real < 0)) == stable
    if math.isfinite(k_high):
        for k, stable in ((0.98 * k_high, True), (1.02 * k_high, False)):
            poles = control.feedback(k * L, 1).poles()
            assert (np.all(np.abs(poles) < 1) if L.isdtime(strict=True) else np.all(poles.real < 0)) == stable
    # peak sensitivity: dense grid of python-control's own frequency response
    w = np.geomspace(1e-2, (math.pi / T if T else 1e5), 20001)
    S = 1 / np.abs(1 + L(np.exp(1j * w * T) if T else 1j * w))
    assert mg.peak_sensitivity == pytest.approx(S.max(), rel=1e-4)
    assert mg.sample_time_s == T and mg.delay_samples == 0


def test_crosstalk_destabilises_sampled_pd(params):
    # A Hall-type sensor crosstalk G_i seen one sample late (G_i z^-1) meets the lead's high
    # high-frequency gain C(inf) = Kp + Kd/tau_f at the Nyquist frequency (z = -1, where Tustin
    # puts s = inf): with C(inf) G_i ~ 1 the loop fails. The margins must say so, in agreement
    # with control.feedback's poles and python-control's Nyquist count.
    plant = linear_plant(make_params(sensor_crosstalk_per_A=0.5), "current")
    c = design_controller(plant, sample_time_s=T_S)
    hf_gain = c.kp_A_per_signal + c.kd_A_s_per_signal / c.derivative_filter_tau_s
    assert hf_gain * 0.5 > 0.9
    mg = loop_margins(plant, c)
    z = control.feedback(mg.loop, 1).poles()
    assert not mg.stable and np.any(np.abs(z) > 1)
    assert mg.encirclements_ccw != mg.open_loop_unstable_poles
    assert math.isnan(mg.gain_interval[0])
    cnt = control.nyquist_response(mg.loop, warn_encirclements=False, warn_nyquist=False).count
    assert mg.encirclements_ccw == -cnt
    # Nyquist: closed-loop poles outside = P - N_ccw
    assert np.sum(np.abs(z) > 1) == mg.open_loop_unstable_poles - mg.encirclements_ccw


def test_discrete_pid_integrator_on_unit_circle(params):
    # An integrator puts a pole on the unit circle; the contour is indented outside it, so it
    # counts as stable. Check the count against the closed-loop poles (Nyquist: N_ccw = P - Z).
    plant = linear_plant(params, "current")
    c = design_controller(plant, sample_time_s=T_S, kind="pid")
    mg = loop_margins(plant, c)
    z = control.feedback(mg.loop, 1).poles()
    assert np.all(np.abs(z) < 1)
    assert mg.encirclements_ccw == mg.open_loop_unstable_poles == 1
    # python-control indents by the exact sign of |z| - 1 of the computed integrator pole (here
    # round-off puts it just outside the circle); its raw count obeys the Nyquist relation
    # Z = N_cw + P with its own strict pole count, which is why the count is shifted to ours
    raw = control.nyquist_response(mg.loop, warn_encirclements=False, warn_nyquist=False).count
    strict = int(np.sum(np.abs(mg.loop.poles()) > 1))
    assert raw + strict == np.sum(np.abs(z) >= 1) == 0
    # gains just outside the interval are unstable, just inside stable
    k_low, k_high = mg.gain_interval
    for k, stable in ((0.98 * k_low, False), (1.02 * k_low, True), (0.98 * k_high, True), (1.02 * k_high, False)):
        assert np.all(np.abs(control.feedback(k * mg.loop, 1).poles()) < 1) == stable


def test_delay_eats_phase_margin(params):
    # a pure delay tau has gain 1 and phase -w tau, so it costs w_c tau of phase margin (Franklin,
    # Powell & Emami-Naeini, Feedback Control of Dynamic Systems, frequency-response design,
    # "time delay"; section number not checked). The 6th-order Pade approximant is exact to
    # < 0.01 deg at w_c tau = 0.064 rad.
    plant = linear_plant(params, "current")
    c = design_controller(plant)
    pm0 = loop_margins(plant, c, loop_delay_s=0.0).phase_margin_deg
    tau = 5e-4
    pm1 = loop_margins(plant, c, loop_delay_s=tau).phase_margin_deg
    assert pm0 - pm1 == pytest.approx(math.degrees(c.crossover_rad_per_s * tau), abs=0.01)


def test_design_refuses_too_much_lead(params):
    with pytest.raises(SolverError, match="design_controller: needed lead phase must be at most 75 deg"):
        design_controller(linear_plant(params, "current"), phase_margin_deg=70.0, sample_time_s=T_S,
                          loop_delay_s=1e-3)


def test_proportional_only(params):
    # current drive: s^2 + (k_s + K k_i G_s)/m = 0 -> +-j sqrt(K k_i G_s/m - p^2) above K_crit
    plant = linear_plant(params, "current")
    st = proportional_only(plant, gain_multiples=(0.5, 2.0, 4.0))
    assert not st.stabilisable
    kcrit = -KS_N_PER_M / (KI_N_PER_A * 1000.0)
    assert st.critical_gain == pytest.approx(kcrit, rel=TIGHT)
    assert st.max_real_part_rad_per_s[0] == pytest.approx(math.sqrt(0.5 * -KS_N_PER_M / M_KG), rel=TIGHT)
    for mult, row in zip((2.0, 4.0), st.closed_loop_poles_rad_per_s[1:]):
        w = math.sqrt(mult * kcrit * KI_N_PER_A * 1000.0 / M_KG + KS_N_PER_M / M_KG)
        assert np.abs(row.real) == pytest.approx([0, 0], abs=1e-9)
        assert np.sort(row.imag) == pytest.approx([-w, w], rel=TIGHT)
    # voltage drive, Routh-Hurwitz on the cubic: b = k_i^2/(m L) < p^2 -> no stable gain
    vst = proportional_only(linear_plant(params, "voltage"))
    assert not vst.stabilisable and np.all(vst.max_real_part_rad_per_s > 0)
    # b = k_i^2/(m L) below p^2 = -k_s/m: no Routh window
    assert vst.back_emf_damping_per_s2 == pytest.approx(KI_N_PER_A**2 / (M_KG * 0.15), rel=TIGHT)
    assert vst.unstable_stiffness_per_s2 == pytest.approx(-KS_N_PER_M / M_KG, rel=TIGHT)
    assert all(math.isnan(v) for v in vst.stable_gain_window)
    # a coil with strong coupling and small L (b > p^2) has the Routh window (R/L) p^2 < K' < (R/L) b
    strong = make_params(force_per_ampere_N_per_A=1.2, inductance_H=0.01, hover_current_A=0.09,
                         resistance_ohm=2.0)
    pl = linear_plant(strong, "voltage")
    a, b, p2 = 2.0 / 0.01, 1.2**2 / (M_KG * 0.01), -KS_N_PER_M / M_KG
    assert b > p2
    kp_ = math.sqrt(a * p2 * a * b)  # K' at the geometric middle of the window
    K_V_per_V = kp_ * M_KG * 0.01 / (1000.0 * 1.2)
    st2 = proportional_only(pl, gain_multiples=(K_V_per_V / proportional_only(pl).critical_gain,))
    # independent: roots of the Routh cubic with K' = K G_s k_i/(m L)
    roots = np.roots([1.0, a, b - p2, kp_ - a * p2])
    assert np.all(roots.real < 0)
    assert st2.stabilisable
    lo, hi = st2.stable_gain_window
    assert lo == pytest.approx(a * p2 * M_KG * 0.01 / (1000.0 * 1.2), rel=TIGHT)
    assert hi == pytest.approx(a * b * M_KG * 0.01 / (1000.0 * 1.2), rel=TIGHT)
    assert lo < K_V_per_V < hi
    assert np.sort_complex(st2.closed_loop_poles_rad_per_s[0]) == pytest.approx(np.sort_complex(roots), rel=1e-7)


# ------------------------------------------------------------------------------------------
# Nonlinear simulation
# ------------------------------------------------------------------------------------------


def _linear_sampled_step(controller, step_m, t_s, delay_samples=0):
    """Sampled-data linear closed loop (exact at samples): plant ZOH-discretised by control.c2d,
    a whole-sample delay as z^-d."""
    Pd = control.c2d(controller.loop_plant, T_S, "zoh")
    fwd = controller.discrete_tf * Pd
    if delay_samples:
        fwd = fwd * control.tf([1.0], [1.0] + [0.0] * delay_samples, T_S)
    Tcl = control.feedback(fwd, 1)
    return control.forced_response(Tcl, t_s, np.full(t_s.size, 1000.0 * step_m)).outputs / 1000.0


@pytest.mark.parametrize("drive,step_m,delay_s", [("current", 1e-4, 0.0), ("voltage", 2.5e-5, 0.0),
                                                   ("current", 1e-4, 2 * T_S)])
def test_small_step_matches_linear(params, table, drive, step_m, delay_s):
    # voltage drive uses a smaller step: 0.1 mm already drives the coil into the 24 V limit
    c = design_controller(linear_plant(params, drive), sample_time_s=T_S, loop_delay_s=delay_s)
    t = np.arange(0, 0.3 + 1e-12, T_S)
    errs = []
    for step in (step_m, step_m / 2):
        r = simulate(params, table, c, Scenario(t_end_s=0.3, reference_m=step), loop_delay_s=delay_s)
        assert r.events == ()
        s_nl = np.interp(t, r.time_s, r.s_m)
        lin = _linear_sampled_step(c, step, t, int(round(delay_s / T_S)))
        errs.append(np.max(np.abs(s_nl - lin)) / step)
    # the force's curvature gives an error ~ (step/d0) relative: 1e-4/0.0216 -> a few 0.1 %-2 %
    assert errs[0] < 0.03
    # and it is second order: halving the step halves the relative error (ratio 2 expected)
    assert errs[0] / errs[1] == pytest.approx(2.0, rel=0.15)


def test_converges_to_equilibrium_from_offset(params, table):
    c = design_controller(linear_plant(params, "voltage"), sample_time_s=T_S)
    r = simulate(params, table, c, Scenario(t_end_s=0.6, s0_m=-1e-3))
    assert r.events == ()
    assert abs(r.s_m[-1]) < 1e-7 and abs(r.v_m_per_s[-1]) < 1e-5
    assert r.current_A[-1] == pytest.approx(I0_A, rel=1e-4)
    # the linear sensor reads G_s s (no crosstalk)
    assert r.signal == pytest.approx(1000.0 * r.s_m, rel=TIGHT, abs=1e-15)


def test_free_fall(params, table):
    # coil off, no magnetic force (F0 = 0): s(t) = -g t^2/2 exactly (Galileo); RK45 integrates a
    # quadratic exactly, the event is located by root finding on the dense output
    r = simulate(params, table, None, Scenario(t_end_s=0.2), drive="current")
    assert len(r.events) == 1 and r.events[0].kind == Outcome.FELL
    t_edge = math.sqrt(2 * 0.010 / G)
    assert r.events[0].time_s == pytest.approx(t_edge, abs=1e-12)
    assert np.max(np.abs(r.s_m + G * r.time_s**2 / 2)) < 1e-14
    assert r.time_s[-1] == pytest.approx(t_edge, abs=1e-12)


def test_payload_offset_pd_and_pid(params, table):
    plant = linear_plant(params, "current")
    dm = 0.5e-3
    pd = design_controller(plant, sample_time_s=T_S)
    r = simulate(params, table, pd, Scenario(t_end_s=1.0, payload_kg=dm, payload_time_s=0.05))
    # static balance (linear statics): (-k_s - Kp k_i G_s) s = dm g
    s_ref = -dm * G / (KS_N_PER_M + pd.kp_A_per_signal * KI_N_PER_A * 1000.0)
    assert r.s_m[-1] == pytest.approx(s_ref, rel=0.02)  # nonlinearity ~ |s|/d0 x 4 ~ 1.5 %
    pid = design_controller(plant, sample_time_s=T_S, kind="pid")
    r2 = simulate(params, table, pid, Scenario(t_end_s=1.5, payload_kg=dm, payload_time_s=0.05))
    assert abs(r2.s_m[-1]) < 0.01 * abs(s_ref)
    # impulse and force step run through and are rejected
    r3 = simulate(params, table, pid, Scenario(t_end_s=1.0, force_impulse_N_s=2e-5, force_impulse_time_s=0.1,
                                               force_step_N=-2e-3, force_step_time_s=0.3))
    assert r3.events == () and abs(r3.s_m[-1]) < 1e-6


def test_saturation_and_contact(params, table):
    # a start 8 mm below equilibrium asks for more than 1 A: the current clips and the floater falls
    c = design_controller(linear_plant(params, "current"), sample_time_s=T_S)
    r = simulate(params, table, c, Scenario(t_end_s=0.5, s0_m=-8e-3))
    assert np.max(np.abs(r.current_A)) <= 1.0 + 1e-12
    assert r.events and r.events[0].kind == "fell"
    with pytest.raises(ContactError, match="simulate: scenario.s0_m must be inside the force table"):
        simulate(params, table, c, Scenario(s0_m=0.02))


def test_capture_range_agrees_with_solve_ivp(params, table):
    c = design_controller(linear_plant(params, "current"), sample_time_s=T_S)
    s0 = np.linspace(-0.008, 0.008, 9)
    cap = capture_range(params, table, c, s0, (-0.1, 0.0, 0.1), t_end_s=0.4, band_refine_rounds=1)
    assert cap.captured.shape == (9, 3)
    lo, hi = cap.band_m
    assert lo < 0 < hi
    # spot checks with the adaptive solve_ivp simulation (independent integrator)
    for i in range(9):
        r = simulate(params, table, c, Scenario(t_end_s=0.4, s0_m=float(s0[i])))
        ok = (not r.events) and abs(r.s_m[-1]) < cap.tolerance_m and abs(r.v_m_per_s[-1]) < cap.tolerance_m_per_s
        assert ok == bool(cap.captured[i, 1]), s0[i]
        if r.events:
            assert r.events[0].kind == cap.fate[i, 1]
    # band edges: just inside is captured, just outside is not
    for s_in, s_out in ((lo, lo - 2 * cap.band_resolution_m), (hi, hi + 2 * cap.band_resolution_m)):
        rin = simulate(params, table, c, Scenario(t_end_s=0.4, s0_m=s_in))
        rout = simulate(params, table, c, Scenario(t_end_s=0.4, s0_m=s_out))
        assert not rin.events and abs(rin.s_m[-1]) < cap.tolerance_m
        assert rout.events or abs(rout.s_m[-1]) >= cap.tolerance_m


@pytest.mark.parametrize("n_s, n_v", [(41, 15), (40, 14), (7, 2), (5, 11)])
def test_capture_grids_of_any_size_give_one_zero_row_and_a_picture(params, table, n_s, n_v):
    """A symmetric linspace in velocity puts about -2.8e-17 where 0 was meant (floating-point
    rounding of (-v + k dv), common practice, no source): that is the zero-velocity row, not an
    extra one, so the map has exactly the grid's shape, even or odd; and the picture is drawn from
    the result's own grids (a report once failed here with 'C (16, 41) incompatible with X (41)')."""
    from fields.io import plots

    c = design_controller(linear_plant(params, "current"), sample_time_s=T_S)
    s0 = np.linspace(-0.004, 0.004, n_s)
    vmax = 0.013801900950475237  # linspace(-vmax, vmax, 15)[7] is -1.7e-18 here, not 0
    v0 = np.linspace(-vmax, vmax, n_v)
    if n_v == 15:
        assert v0[7] != 0.0  # the case that once added a row
    cap = capture_range(params, table, c, s0, v0, t_end_s=0.2, band_refine_rounds=0)
    extra = 0 if n_v % 2 else 1  # even counts have no middle point: 0 is added
    assert cap.captured.shape == (n_s, n_v + extra)
    assert np.count_nonzero(cap.v0_grid_m_per_s == 0.0) == 1
    assert np.all(np.diff(cap.v0_grid_m_per_s) > 0)
    fig = plots.capture_map(cap, title="t")
    assert fig.axes
    plots.close(fig)


def test_hysteresis_study(params, table):
    c = design_controller(linear_plant(params, "current"), sample_time_s=T_S)
    bands = np.array([0.2e-3, 0.5e-3, 1e-3])
    hs = hysteresis_study(params, table, c, bands, mode="current", t_end_s=0.4)
    assert hs.status == ("limit cycle",) * 3
    assert np.all(np.diff(hs.amplitude_m) > 0) and np.all(np.diff(hs.frequency_Hz) < 0)
    # switched current 0 / I_on: <R I^2> = R d I_on^2 (identity), and the mean force balances the
    # weight, d I_on Fk ~ m g, so the Joule power is ~ R I0^2 / d (amplitudes are microns: < 1 %)
    R, Ion = 20.0, 1.0
    assert hs.mean_joule_power_W == pytest.approx(R * hs.duty * Ion**2, rel=1e-6)
    # (the floater oscillates about a mean slightly off 0 where Fk differs by ~4 s_mean/d0: 3 %)
    assert hs.mean_joule_power_W == pytest.approx(R * I0_A**2 / hs.duty, rel=0.03)
    assert hs.linear_mean_joule_power_W == pytest.approx(R * I0_A**2, rel=1e-4)
    # the linear loop's start transient (0.5 mm) has decayed to nanometres in the second half
    assert hs.linear_amplitude_m < 1e-2 * hs.amplitude_m.min()
    # without the velocity term the relay's lag pumps energy into the unstable plant: the
    # oscillation grows until the floater leaves (describing-function argument, Gelb & Vander
    # Velde, Multiple-Input Describing Functions and Nonlinear System Design, 1968, recalled from
    # memory: the
    # hysteresis relay's -1/N locus lies below the real axis, the plant's locus on it)
    h0 = hysteresis_study(params, table, c, [0.5e-3], mode="current", t_end_s=0.5, lead_time_s=0.0)
    assert h0.status[0] in ("fell", "contact") and h0.end_time_s[0] < 0.5
    # voltage switching: energy balance <V I> = <R I^2> + d/dt(L I^2/2) + <Fk v I>; over many
    # cycles of a steady oscillation the last two average out (Woodson & Melcher 1968, ch. 3)
    hv = hysteresis_study(params, table, c, [0.5e-3], mode="voltage", t_end_s=0.4)
    assert hv.status == ("limit cycle",)
    assert hv.mean_supply_power_W[0] == pytest.approx(hv.mean_joule_power_W[0], rel=0.02)
    assert hv.mean_joule_power_W[0] > R * I0_A**2


def test_leaving_the_table_sideways_is_told_in_words(table):
    # the same invented plant named as a non-vertical axis (gravity kept along -s so that the
    # equilibrium is the same): a start 8 mm on the minus side asks for more than the 1 A limit
    # and the floater is lost there (as in test_saturation_and_contact for the vertical axis);
    # the fate a user reads (capture.csv's fate column) is words, not a code name
    side = make_params(axis_name="sideways x", gravity_m_per_s2=G)
    c = design_controller(linear_plant(side, "current"), sample_time_s=T_S)
    cap = capture_range(side, table, c, (-0.008, 0.0), (0.0,), t_end_s=0.3, band_refine_rounds=0)
    assert cap.fate[0, 0] == Outcome.LEFT_TABLE_LOW.value
    assert cap.fate[0, 0].startswith("lost on the minus side") and "force table" in cap.fate[0, 0]
    assert cap.fate[1, 0] == Outcome.CAPTURED.value
    for o in Outcome:  # every fate and on/off status reads as words; the code stays machine-readable
        assert "_" not in o.value and o.code.isidentifier()


def test_bode_axis_is_in_the_unit_of_the_quoted_poles(params):
    # the report quotes poles and crossovers in rad/s; the Bode figure's axis uses rad/s too, and
    # its crossover marker sits at |L| = 1 (0 dB) read off the plotted curve itself
    from fields.io import plots

    plant = linear_plant(params, "current")
    mg = loop_margins(plant, design_controller(plant, loop_delay_s=0.0))
    fig = plots.bode(mg)
    a1, a2 = fig.axes
    assert "rad/s" in a2.get_xlabel() and "Hz" not in a2.get_xlabel()
    w, gain_db = a1.get_lines()[0].get_data()
    wc = float(mg.gain_crossovers_rad_per_s[0])
    marks = [ln.get_xdata()[0] for ln in a1.get_lines()[2:]]
    assert wc in marks
    # independent reading of the crossover: where the plotted gain passes 0 dB (log interpolation)
    i = int(np.flatnonzero(np.diff(np.sign(gain_db)))[0])
    w0 = np.exp(np.interp(0.0, [gain_db[i + 1], gain_db[i]], [np.log(w[i + 1]), np.log(w[i])]))
    assert w0 == pytest.approx(wc, rel=0.02)  # plot grid resolution


def test_growth_time_is_said_to_be_the_floater_at_a_held_current():
    # the verdict's time constant 1/sqrt(-k/m) (the floater alone, current drive) is told apart
    # from the voltage-driven plant's, which includes the coil
    from fields.analysis.verdict import Mode, ModeKind
    from fields.io.wording import mode_text

    k, m = -20.0, 0.011
    t = 1 / math.sqrt(-k / m)
    text = mode_text(Mode(ModeKind.VERTICAL, ("z",), False, False, k, "N/m", None, t, np.ones(1)))
    assert f"time constant {t * 1e3:.3g} ms (the floater alone at a held current" in text
    assert "the control plant's time constant adds the coil" in text
