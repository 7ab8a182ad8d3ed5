"""Material and wire tables against their named standards."""

import re

import pytest

from fields.input import tables


@pytest.mark.parametrize(
    "gauge, inches",
    [
        # ASTM B258 table of nominal diameters (values as commonly tabulated; from memory)
        (10, 0.1019),
        (20, 0.0320),
        (26, 0.0159),
        (30, 0.0100),
        (36, 0.0050),
        (40, 0.0031),
    ],
)
def test_awg_diameters_against_astm_b258(gauge, inches):
    # the standard rounds to 4 decimals of an inch (1e-4 in), so compare to half a unit
    assert tables.awg_diameter_m(gauge) / 0.0254 == pytest.approx(inches, abs=0.5e-4 + 1e-9)


def test_awg_ratio_definition():
    # ASTM B258: 39 gauge steps span a ratio of exactly 92 in diameter
    assert tables.awg_diameter_m(0) / tables.awg_diameter_m(39) == pytest.approx(92.0, rel=1e-12)


@pytest.mark.parametrize("text, n", [("AWG 26", 26), ("26 AWG", 26), ("awg26", 26), ("4/0 AWG", -3), ("00", -1)])
def test_parse_gauge(text, n):
    assert tables.parse_gauge(text) == n


def test_copper_iec_60028():
    # IEC 60028: annealed copper 1/58 ohm mm^2/m at 20 C = 1.7241e-8 ohm m; alpha 0.00393 /K; 8890 kg/m^3
    assert tables.COPPER_RESISTIVITY_20C_OHM_M == pytest.approx(1.7241e-8, rel=1e-4)
    assert tables.COPPER_ALPHA_20C_PER_K == pytest.approx(0.00393)
    assert tables.COPPER_DENSITY_KG_PER_M3 == pytest.approx(8890.0)


def test_grade_ranges_are_ordered_and_plausible():
    # sintered NdFeB remanence lies between 1.0 and 1.5 T and hard ferrite between 0.2 and 0.5 T
    # (IEC 60404-8-1 material families; from memory); grade N numbers rise with remanence
    nd = [g for g in tables.GRADES.values() if g.family == "NdFeB"]
    for g in tables.GRADES.values():
        assert g.remanence_min_T < g.remanence_max_T
        lo, hi = (1.0, 1.5) if g.family == "NdFeB" else (0.2, 0.5)
        assert lo < g.remanence_min_T and g.remanence_max_T < hi
    nd = [g for g in nd if g.name[1:].isdigit()]  # the plain grades; the temperature classes below
    nd.sort(key=lambda g: int(g.name[1:]))
    noms = [g.remanence_nominal_T for g in nd]
    assert noms == sorted(noms)
    # energy product check: an N-number is the grade's (BH)max in MGOe; for a linear magnet with
    # mu_r ~ 1.05, (BH)max ~ Br^2 / (4 mu0 mu_r). Common practice, no source: the nominal Br must give
    # (BH)max within 15 % of the grade number.
    for g in nd:
        bhmax_kj = g.remanence_nominal_T ** 2 / (4 * tables.MU_0 * 1.05) / 1e3
        mgoe = bhmax_kj / 7.957747
        assert mgoe == pytest.approx(int(g.name[1:]), rel=0.15)


def test_lookup_is_case_insensitive():
    assert tables.lookup_grade("n42").name == "N42"
    assert tables.lookup_grade("N99") is None


def test_parse_gauge_rejects_sizes_outside_the_awg_series():
    # AWG runs from 0000 to 56 in the ASTM B258 series (common practice, no source for the 56 end)
    from fields.errors import InputError

    with pytest.raises(InputError, match="parse_gauge: the gauge must be between AWG 0000 and AWG 56"):
        tables.parse_gauge("AWG 60")
    with pytest.raises(InputError, match="parse_gauge: the gauge must be an AWG size"):
        tables.parse_gauge("thick")


def test_temperature_classes_share_the_plain_grades_range_and_rise_in_temperature():
    # the suffix (M, H, SH, UH, EH, AH) raises the working temperature at the same remanence
    # (common practice, no source; the temperatures from memory): each class is hotter than the one
    # before, and N42SH has N42's range
    temps = [t for _, t in tables.NDFEB_TEMPERATURE_CLASSES_C]
    assert temps == sorted(temps) and len(set(temps)) == len(temps)
    for g in tables.GRADES.values():
        if g.family != "NdFeB":
            continue
        base = tables.lookup_grade(re.match(r"N\d+", g.name).group(0))
        assert (g.remanence_min_T, g.remanence_max_T) == (base.remanence_min_T, base.remanence_max_T)
        assert g.max_operating_temperature_C >= base.max_operating_temperature_C
    assert tables.lookup_grade("n42sh").max_operating_temperature_C == 150.0
