"""Material and wire tables.

Every value names where it comes from. Values marked "from memory" were recalled without the
document at hand and should be checked against the named standard before being relied on.
"""

from __future__ import annotations


from dataclasses import dataclass

from scipy import constants

from fields.errors import InputError


@dataclass(frozen=True)
class Grade:
    """A permanent-magnet grade.

    Attributes
    ----------
    name : str
        Grade designation as written in the geometry file (case-insensitive lookup).
    family : str
        ``"NdFeB"`` (sintered neodymium-iron-boron) or ``"ferrite"`` (hard ceramic ferrite).
    remanence_min_T, remanence_max_T : float
        Remanence range of the grade (T).
    density_kg_per_m3 : float
        Typical density (kg/m^3).
    source : str
        Where the numbers come from.
    max_operating_temperature_C : float or None
        Highest working temperature of the grade's temperature class (C), None when not tabulated.
    """

    name: str
    family: str
    remanence_min_T: float
    remanence_max_T: float
    density_kg_per_m3: float
    source: str
    max_operating_temperature_C: float | None = None

    @property
    def remanence_nominal_T(self) -> float:
        """Mid-range remanence (T), the value the solver uses unless the file gives one."""
        return 0.5 * (self.remanence_min_T + self.remanence_max_T)


_NDFEB_SRC = (
    "sintered NdFeB grade ranges as tabulated in GB/T 13560 (Sintered neodymium iron boron "
    "permanent magnets) and the family values of IEC 60404-8-1 (Magnetically hard materials); "
    "from memory"
)
_FERRITE_SRC = (
    "hard ferrite classes of IEC 60404-8-1 (Magnetically hard materials, table of hard ferrites) "
    "and MMPA Standard 0100-00 (ceramic grades C5, C8); from memory"
)
#: density of sintered NdFeB, typical (kg/m^3); from memory
NDFEB_DENSITY = 7500.0
#: density of sintered hard ferrite, typical (kg/m^3); from memory
FERRITE_DENSITY = 4900.0

#: (grade, remanence min T, remanence max T) of each family
_NDFEB_REMANENCE_T = (("N35", 1.17, 1.22), ("N38", 1.22, 1.25), ("N40", 1.25, 1.28), ("N42", 1.28, 1.32),
                      ("N45", 1.32, 1.38), ("N48", 1.38, 1.42), ("N50", 1.40, 1.45), ("N52", 1.43, 1.48))
_FERRITE_REMANENCE_T = (("C5", 0.36, 0.40), ("C8", 0.38, 0.41), ("HF24/23", 0.35, 0.37), ("HF28/26", 0.37, 0.39))

#: temperature classes of sintered NdFeB: the suffix after the energy number and the highest working
#: temperature (C) the trade gives for it (no suffix 80 C, M 100 C, H 120 C, SH 150 C, UH 180 C,
#: EH 200 C, AH 230 C; common practice, no source; the temperatures from memory)
NDFEB_TEMPERATURE_CLASSES_C = (("", 80.0), ("M", 100.0), ("H", 120.0), ("SH", 150.0), ("UH", 180.0),
                               ("EH", 200.0), ("AH", 230.0))
#: which energy numbers are made in each temperature class, with the class's remanence range (T):
#: the same range as the plain grade of that energy number where the class is made (the suffix
#: trades coercivity for remanence only at the top grades, which are not made in the hot
#: classes); from memory, the same GB/T 13560 tables
_NDFEB_HOT_GRADES = {"M": ("N35", "N38", "N40", "N42", "N45", "N48", "N50"),
                     "H": ("N35", "N38", "N40", "N42", "N45", "N48"),
                     "SH": ("N35", "N38", "N40", "N42", "N45"),
                     "UH": ("N35", "N38", "N40", "N42"),
                     "EH": ("N35", "N38", "N40"),
                     "AH": ("N35", "N38")}
#: hard ferrite: highest working temperature (C), common practice, no source (from memory)
FERRITE_MAX_OPERATING_C = 250.0

#: reversible temperature coefficient of the remanence (1/K) near room temperature, by family:
#: sintered NdFeB about -0.12 %/K, hard ferrite about -0.20 %/K (IEC 60404-8-1 quotes typical
#: values of this size in its informative material data; from memory). Br(T) = Br(T0) (1 + alpha (T - T0)).
REMANENCE_TEMPERATURE_COEFFICIENT_PER_K = {"NdFeB": -0.0012, "ferrite": -0.0020}
REMANENCE_TEMPERATURE_SOURCE = ("reversible temperature coefficient of Br: NdFeB -0.12 %/K, ferrite -0.20 %/K, "
                                "typical values (IEC 60404-8-1 material data); from memory")


def _ndfeb_rows():
    base = {name: (lo, hi) for name, lo, hi in _NDFEB_REMANENCE_T}
    for suffix, t_max in NDFEB_TEMPERATURE_CLASSES_C:
        names = [n for n, _, _ in _NDFEB_REMANENCE_T] if not suffix else _NDFEB_HOT_GRADES[suffix]
        for n in names:
            yield n + suffix, base[n][0], base[n][1], t_max


GRADES: dict[str, Grade] = {
    name.upper(): Grade(name, family, lo, hi, density, source, t_max)
    for family, density, source, rows in (
        ("NdFeB", NDFEB_DENSITY, _NDFEB_SRC, tuple(_ndfeb_rows())),
        ("ferrite", FERRITE_DENSITY, _FERRITE_SRC,
         tuple((n, lo, hi, FERRITE_MAX_OPERATING_C) for n, lo, hi in _FERRITE_REMANENCE_T)))
    for name, lo, hi, t_max in rows
}


def magnet_family(grade: str | None, remanence_T: float) -> str:
    """``"NdFeB"`` or ``"ferrite"``: the grade's family, else by remanence (above 0.6 T: NdFeB, the
    loader's density rule)."""
    g = lookup_grade(grade) if grade else None
    if g is not None:
        return g.family
    return "NdFeB" if remanence_T > 0.6 else "ferrite"


def lookup_grade(name: str) -> Grade | None:
    """Return the grade called ``name`` (case-insensitive), or None when unknown."""
    return GRADES.get(name.strip().upper())


# --- wire -------------------------------------------------------------------------------------

#: American Wire Gauge: ASTM B258 (Standard Specification for Standard Nominal Diameters and
#: Cross-Sectional Areas of AWG Sizes of Solid Round Wires) defines the series by
#: d(n) = 0.005 in * 92 ** ((36 - n) / 39), with gauge 0000 = n of -3 (0.46 in) and 36 = 0.005 in.
AWG_SOURCE = "ASTM B258, definition d(n) = 0.005 in x 92^((36-n)/39)"


def awg_diameter_m(gauge: int) -> float:
    """Bare diameter of AWG ``gauge`` (m), from the ASTM B258 defining formula.

    Examples
    --------
    >>> round(awg_diameter_m(36) / 0.0254, 6)
    0.005
    >>> round(awg_diameter_m(-3) / 0.0254, 4)   # 0000 gauge
    0.46
    """
    return 0.005 * 0.0254 * 92.0 ** ((36 - gauge) / 39.0)


def parse_gauge(text: str) -> int:
    """Parse ``"AWG 26"``, ``"26 AWG"``, ``"AWG26"``, ``"4/0 AWG"`` to the AWG number (0000 -> -3)."""
    t = text.strip().upper().replace("AWG", "").strip()
    zeros = {"0": 0, "1/0": 0, "00": -1, "2/0": -1, "000": -2, "3/0": -2, "0000": -3, "4/0": -3}
    if t in zeros:
        return zeros[t]
    try:
        n = int(t)
    except ValueError:
        raise InputError(f"parse_gauge: the gauge must be an AWG size such as \"AWG 26\"; got {text!r}.") from None
    if not 0 <= n <= 56:
        raise InputError(f"parse_gauge: the gauge must be between AWG 0000 and AWG 56; got {text!r}.")
    return n


# --- copper -----------------------------------------------------------------------------------

#: resistivity of annealed copper at 20 C, ohm m: the International Annealed Copper Standard,
#: IEC 60028 (1925): 1/58 ohm mm^2/m
COPPER_RESISTIVITY_20C_OHM_M = 1.0 / 58.0 * 1e-6
#: temperature coefficient of resistance of annealed copper at 20 C, 1/K (IEC 60028: 0.00393)
COPPER_ALPHA_20C_PER_K = 0.00393
#: density of copper, kg/m^3 (IEC 60028: 8890 kg/m^3 at 20 C)
COPPER_DENSITY_KG_PER_M3 = 8890.0
COPPER_SOURCE = "IEC 60028 (International Annealed Copper Standard)"

#: magnet-wire thermal classes (C), IEC 60317 / IEC 60085 thermal class designations
THERMAL_CLASSES_C = (105.0, 120.0, 130.0, 155.0, 180.0, 200.0, 220.0, 240.0)
THERMAL_CLASS_SOURCE = "IEC 60085 thermal classes as used by the IEC 60317 magnet-wire series"

MU_0 = constants.mu_0
#: standard acceleration of gravity, 9.80665 m/s^2 (3rd CGPM, 1901), the one name the package uses
G_STANDARD = constants.g
#: densest packing of equal round wires (hexagonal): pi / (2 sqrt 3) = 0.9069
HEXAGONAL_FILL = constants.pi / (2.0 * 3.0**0.5)

__all__ = [
    "Grade", "GRADES", "lookup_grade", "magnet_family", "REMANENCE_TEMPERATURE_COEFFICIENT_PER_K",
    "NDFEB_TEMPERATURE_CLASSES_C", "awg_diameter_m", "parse_gauge", "AWG_SOURCE",
    "COPPER_RESISTIVITY_20C_OHM_M", "COPPER_ALPHA_20C_PER_K", "COPPER_DENSITY_KG_PER_M3",
    "THERMAL_CLASSES_C", "MU_0", "G_STANDARD", "HEXAGONAL_FILL",
]
