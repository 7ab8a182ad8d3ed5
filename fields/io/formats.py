"""Text formats for other tools: C header arrays for firmware, a SPICE subcircuit of the plant.

Pure functions from arrays to text (no file IO). Numbers are written with 17 significant digits
(double) or 9 (single precision) so that reading them back gives the same binary values
(IEEE 754-2008, sec. 5.12.2: 17 and 9 decimal digits round-trip binary64 and binary32).
"""

from __future__ import annotations

import math
import re

import numpy as np

from fields import __version__
from fields.errors import InputError

#: the value a C table holds where it has none (non-finite, or beyond a stated limit); finite in
#: binary32 and binary64, far outside any force, current or stiffness of a levitation device
NO_VALUE = -1.0e30
#: ``x`` is "no value" when ``x <= NO_VALUE_BELOW`` (safe against rounding of the flag)
NO_VALUE_BELOW = -1.0e29


def c_ident(name: str) -> str:
    """A C identifier (upper case) from any text: other characters become ``_``.

    >>> c_ident("suspension-demo"), c_ident("2 coils")
    ('SUSPENSION_DEMO', 'HF_2_COILS')
    """
    s = re.sub(r"[^0-9a-zA-Z_]+", "_", name).strip("_").upper()
    return ("HF_" + s) if not s or s[0].isdigit() else s


def _num(x: float) -> str:
    return f"{float(x):.17g}"


def _cnum(x: float, single: bool) -> str:
    """A C literal: 17 significant digits (double) or 9 with an ``f`` suffix (float)."""
    if single:
        t = f"{float(np.float32(x)):.9g}"
        return t + ("f" if ("." in t or "e" in t) else ".0f")
    t = _num(x)
    return t if ("." in t or "e" in t or "n" in t) else t + ".0"


def _uniform_step(a: np.ndarray) -> float | None:
    """The step of an evenly spaced increasing 1-D grid (relative tolerance 1e-9), else None."""
    if a.ndim != 1 or a.size < 2:
        return None
    d = np.diff(a)
    step = (a[-1] - a[0]) / (a.size - 1)
    if step > 0 and np.all(np.abs(d - step) <= 1e-9 * abs(step)):
        return float(step)
    return None


def _flagged(a: np.ndarray, limit: tuple[float, float] | None) -> tuple[np.ndarray, int]:
    """``a`` with non-finite values and values outside ``limit`` replaced by :data:`NO_VALUE`."""
    bad = ~np.isfinite(a)
    if limit is not None:
        with np.errstate(invalid="ignore"):
            bad |= (a < limit[0]) | (a > limit[1])
    return np.where(bad, NO_VALUE, a), int(bad.sum())


def _helpers(p: str, real: str, single: bool) -> list[str]:
    """The static inline lookup and bilinear interpolation helpers (C99)."""
    lp = p.lower()
    flag = f"{p}_IS_NO_VALUE"
    one, zero = ("1.0f", "0.0f") if single else ("1.0", "0.0")
    return [
        "/* Index i of the grid cell [axis[i], axis[i+1]] that holds x (axis increasing, n >= 2);",
        " * x outside the grid uses the first or last cell (the interpolation below clamps it). */",
        f"static inline int {lp}_cell(const {real} *axis, int n, {real} x)",
        "{",
        "    int lo = 0, hi = n - 1;",
        "    while (hi - lo > 1) {",
        "        int mid = lo + (hi - lo) / 2;",
        "        if (x < axis[mid]) hi = mid; else lo = mid;",
        "    }",
        "    return lo;",
        "}",
        "",
        "/* Bilinear interpolation of table[n0][n1] (row-major, pass &TABLE[0][0]) at (x0, x1) on the",
        " * grids axis0[n0], axis1[n1]. Points outside the grid are clamped to its edge. Returns",
        f" * {p}_NO_VALUE when a corner of the cell has no value (test it with {flag}). */",
        f"static inline {real} {lp}_interp2(const {real} *table, const {real} *axis0, int n0,",
        f"                                  const {real} *axis1, int n1, {real} x0, {real} x1)",
        "{",
        f"    int i = {lp}_cell(axis0, n0, x0), j = {lp}_cell(axis1, n1, x1);",
        f"    {real} t = (x0 - axis0[i]) / (axis0[i + 1] - axis0[i]);",
        f"    {real} u = (x1 - axis1[j]) / (axis1[j + 1] - axis1[j]);",
        f"    {real} a = table[i * n1 + j], b = table[i * n1 + j + 1];",
        f"    {real} c = table[(i + 1) * n1 + j], d = table[(i + 1) * n1 + j + 1];",
        f"    if ({flag}(a) || {flag}(b) || {flag}(c) || {flag}(d)) return {p}_NO_VALUE;",
        f"    if (t < {zero}) t = {zero};",
        f"    if (t > {one}) t = {one};",
        f"    if (u < {zero}) u = {zero};",
        f"    if (u > {one}) u = {one};",
        f"    return (({one} - t) * (({one} - u) * a + u * b) + t * (({one} - u) * c + u * d));",
        "}",
        "",
    ]


def c_header(design_name: str, arrays: dict[str, np.ndarray], units: dict[str, str], notes: list[str],
             precision: str = "double", tables: dict[str, tuple[str, str]] | None = None,
             limits: dict[str, tuple[float, float]] | None = None,
             constants: dict[str, tuple[float, str]] | None = None) -> str:
    """A C99 header of constant arrays (1-D or 2-D), one per entry of ``arrays``.

    Every name is prefixed with the design's name made a C identifier (:func:`c_ident`), e.g.
    ``SUSPENSION_DEMO_FZ_N``, so headers of several designs can be included together.

    Parameters
    ----------
    design_name : str
    arrays : dict of str to ndarray
        Name -> values; 1-D arrays are grids (an evenly spaced one gets ``_MIN``, ``_STEP`` and
        ``_MAX`` macros), 2-D arrays tables.
    units : dict of str to str
        Unit text per array, written beside it.
    notes : list of str
        Comment lines in the file's opening comment.
    precision : "double" or "single"
        ``double`` (17 digits) or ``float`` (9 digits, ``f`` suffix) arrays; ``<P>_REAL`` names
        the type.
    tables : dict of str to (str, str), optional
        2-D array -> the names of its row and column grids; each gets a function
        ``<p>_<name>_at(row_value, column_value)`` (bilinear, clamped; see
        ``<p>_interp2``).
    limits : dict of str to (float, float), optional
        Array -> (low, high): values outside are written as the flag value.
    constants : dict of str to (float, str), optional
        ``#define <P>_<NAME> value`` with its unit in a comment.

    Notes
    -----
    C gets no NaN or infinity: a value that is not finite (or beyond ``limits``) is written as
    ``<P>_NO_VALUE`` (:data:`NO_VALUE`), and ``<P>_IS_NO_VALUE(x)`` tests for it.
    """
    if precision not in ("double", "single"):
        raise InputError(f"c_header: precision must be \"double\" or \"single\"; got {precision!r}.")
    single = precision == "single"
    real = "float" if single else "double"
    p = c_ident(design_name)
    guard = f"HOVERFIELD_{p}_TABLES_H"
    limits = limits or {}
    lines = [
        "/*",
        f" * hoverfield {__version__} force and stiffness tables for design '{design_name}'.",
        " * Generated file: do not edit; re-run the tool instead. SI units (see each array).",
        f" * Names are prefixed {p}_; arrays are {real} ({precision} precision). Headers of one design in double",
        " * and single precision share the include guard and the names: include one of them.",
        f" * No NaN or infinity: a missing value is {p}_NO_VALUE; test with {p}_IS_NO_VALUE(x).",
    ]
    lines += [f" * {n}" for n in notes]
    lines += [" */", f"#ifndef {guard}", f"#define {guard}", "", f"#define {p}_REAL {real}",
              f"#define {p}_NO_VALUE ({_cnum(NO_VALUE, single)})",
              f"#define {p}_IS_NO_VALUE(x) ((x) <= ({_cnum(NO_VALUE_BELOW, single)}))", ""]
    for name, (value, unit) in (constants or {}).items():
        lines.append(f"#define {p}_{c_ident(name)} ({_cnum(value, single)}) /* {unit} */")
    if constants:
        lines.append("")
    for name, arr in arrays.items():
        a = np.asarray(arr, float)
        cname = f"{p}_{c_ident(name)}"
        a, nflag = _flagged(a, limits.get(name))
        note = units.get(name, "")
        if name in limits:
            lo, hi = limits[name]
            note += f"; values outside {lo!r} .. {hi!r} are {p}_NO_VALUE"
        if nflag:
            note += f"; {nflag} entries have no value"
        lines.append(f"/* {name}: {note} */")
        if a.ndim == 1:
            lines.append(f"#define {cname}_LEN {a.shape[0]}")
            step = _uniform_step(a)
            if step is not None:
                lines += [f"#define {cname}_MIN ({_cnum(a[0], single)})", f"#define {cname}_STEP ({_cnum(step, single)})",
                          f"#define {cname}_MAX ({_cnum(a[-1], single)})"]
            lines.append(f"static const {real} {cname}[{a.shape[0]}] = {{")
            lines += _wrap([_cnum(x, single) for x in a])
            lines.append("};")
        elif a.ndim == 2:
            lines.append(f"#define {cname}_ROWS {a.shape[0]}")
            lines.append(f"#define {cname}_COLS {a.shape[1]}")
            lines.append(f"static const {real} {cname}[{a.shape[0]}][{a.shape[1]}] = {{")
            for row in a:
                lines.append("    {")
                lines += _wrap([_cnum(x, single) for x in row], indent=8)
                lines.append("    },")
            lines.append("};")
        else:
            raise InputError(f"c_header: array {name} must be 1-D or 2-D; got {a.ndim}-D.")
        lines.append("")
    lines += _helpers(p, real, single)
    for name, (ax0, ax1) in (tables or {}).items():
        for ax in (ax0, ax1):
            if ax not in arrays or np.ndim(arrays[ax]) != 1:
                raise InputError(f"c_header: tables[{name!r}] must name 1-D arrays of arrays; got {ax!r}.")
        shape = (len(arrays[ax0]), len(arrays[ax1]))
        if np.shape(arrays[name]) != shape:
            raise InputError(f"c_header: tables[{name!r}] must have the shape of its grids {shape}; "
                             f"got {np.shape(arrays[name])}.")
        t, g0, g1 = (f"{p}_{c_ident(x)}" for x in (name, ax0, ax1))
        fn = f"{p.lower()}_{c_ident(name).lower()}_at"
        lines += [f"/* {name} at ({ax0}, {ax1}): bilinear, clamped to the grid; {p}_NO_VALUE where it has none. */",
                  f"static inline {real} {fn}({real} {c_ident(ax0).lower()}, {real} {c_ident(ax1).lower()})",
                  "{",
                  f"    return {p.lower()}_interp2(&{t}[0][0], {g0}, {g0}_LEN, {g1}, {g1}_LEN, "
                  f"{c_ident(ax0).lower()}, {c_ident(ax1).lower()});",
                  "}", ""]
    lines.append(f"#endif /* {guard} */")
    return "\n".join(lines) + "\n"


def force_tables_header(design_name: str, gap_m, current_A, force_N, Fz_N, kz_N_per_m, ki_N_per_A, I_of_F_A,
                        max_current_A: float, weight_N: float, precision: str = "double",
                        affine_in_current: bool = True, error_Fz_N=None, error_kz_N_per_m=None) -> str:
    """The firmware header of the force tables: F_z, k_z, k_i on (gap, current) and the inverse
    table I(gap, F), whose entries beyond +-``max_current_A`` (the coil cannot give that force)
    or not finite are ``<P>_NO_VALUE``; a lookup function per table (:func:`c_header`). With
    ``error_Fz_N`` and ``error_kz_N_per_m`` (same grid) their error estimates are tables too."""
    imax = abs(float(max_current_A))
    arrays = {"gap_m": gap_m, "current_A": current_A, "force_N": force_N, "Fz_N": Fz_N, "kz_N_per_m": kz_N_per_m,
              "ki_N_per_A": ki_N_per_A, "I_of_F_A": I_of_F_A}
    units = {"gap_m": "m", "current_A": "A", "force_N": "N (columns of I_of_F_A)", "Fz_N": "N, [gap][current]",
             "kz_N_per_m": "N/m, [gap][current]", "ki_N_per_A": "N/A, [gap][current]",
             "I_of_F_A": "A, [gap][force]: the current that gives force F at the gap"}
    for key, err, unit in (("error_Fz_N", error_Fz_N, "N"), ("error_kz_N_per_m", error_kz_N_per_m, "N/m")):
        if err is not None:
            arrays[key] = err
            units[key] = f"{unit}, [gap][current]: error estimate of {key[6:]} (see the CSV table's notes)"
    notes = ["Interpolation: bilinear in (gap, current) is accurate to the grid spacing squared;",
             ("the force is affine in current here, so interpolating along current loses nothing." if affine_in_current
              else "the iron's B-H curve makes the force non-affine in current: interpolate along current with care."),
             f"Weight of the floater {weight_N!r} N; max current {imax!r} A."]
    tables = {"Fz_N": ("gap_m", "current_A"), "kz_N_per_m": ("gap_m", "current_A"),
              "ki_N_per_A": ("gap_m", "current_A"), "I_of_F_A": ("gap_m", "force_N")}
    tables.update({k: ("gap_m", "current_A") for k in ("error_Fz_N", "error_kz_N_per_m") if k in arrays})
    return c_header(design_name, arrays, units, notes, precision=precision, tables=tables,
                    limits={"I_of_F_A": (-imax, imax)},
                    constants={"max_current_A": (imax, "A"), "weight_N": (float(weight_N), "N")})


def _wrap(items: list[str], indent: int = 4, per_line: int = 4) -> list[str]:
    out = []
    for i in range(0, len(items), per_line):
        out.append(" " * indent + ", ".join(items[i:i + per_line]) + ",")
    return out


def parse_c_header(text: str, no_value_as_nan: bool = True) -> dict[str, np.ndarray]:
    """Read back the arrays of a header written by :func:`c_header` (for round-trip checks), by
    their C names; the flag value becomes NaN unless ``no_value_as_nan`` is False."""
    out = {}
    body = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
    for m in re.finditer(r"static const (?:double|float) (\w+)((?:\[\d+\])+) = \{(.*?)\};", body, flags=re.S):
        name, dims, content = m.group(1), m.group(2), m.group(3)
        shape = tuple(int(d) for d in re.findall(r"\[(\d+)\]", dims))
        nums = [float(x) for x in re.findall(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?", content)]
        a = np.array(nums, float).reshape(shape)
        if no_value_as_nan:
            a = np.where(a <= NO_VALUE_BELOW, math.nan, a)
        out[name] = a
    return out


def spice_subcircuit(design_name: str, name: str, s_m: np.ndarray, F0_N: np.ndarray, Fk_N_per_A: np.ndarray,
                     resistance_ohm: float, inductance_H: float, mass_kg: float, gravity_m_per_s2: float,
                     axis: str, inductance_note: str = "") -> str:
    """A SPICE subcircuit of the electromechanical plant along one axis.

    Ports: ``coil_p coil_n`` (the coil's terminals), ``vel`` (velocity, 1 V = 1 m/s) and ``pos``
    (position from the equilibrium, 1 V = 1 m). Inside: the coil's R and L in series with the
    back-EMF ``Fk(s) v`` (reciprocity: the flux linkage changes by Fk per metre), a zero-volt
    source sensing the coil current, and the mechanics as an analog circuit: a capacitor of m
    farads on the velocity node (a current of 1 A is a force of 1 N), the magnetic force
    ``F0(s) + I Fk(s)`` from piecewise-linear tables, gravity as a constant current ``-m g``
    (vertical axis only) and an integrator for the position. Uses B-sources with ``pwl()``
    (ngspice and compatible simulators). ``Lcoil`` is one value: the incremental inductance at
    the operating point (``inductance_note`` says where it comes from, as a comment line).
    """
    sub = re.sub(r"[^0-9a-zA-Z_]", "_", name)
    s = np.asarray(s_m, float)

    def pwl(values) -> str:
        pairs = ", ".join(f"{_num(a)}, {_num(b)}" for a, b in zip(s, values))
        return f"pwl(V(pos), {pairs})"

    mg = mass_kg * gravity_m_per_s2
    lines = [
        f"* hoverfield {__version__}: electromechanical plant of design '{design_name}', axis {axis}",
        "* units: coil volts and amperes; V(vel) in m/s; V(pos) in m from the equilibrium;",
        "* mechanical currents are forces in N; C_mass in farads equals the mass in kg.",
        "* Lcoil: the incremental inductance at the operating point, held constant"
        + (f" ({inductance_note})" if inductance_note else "") + ".",
        f".subckt {sub} coil_p coil_n vel pos",
        f"Rcoil coil_p n1 {_num(resistance_ohm)}",
        f"Lcoil n1 n2 {_num(inductance_H)}",
        f"Bemf n2 n3 V = ({pwl(Fk_N_per_A)}) * V(vel)",
        "Vsense n3 coil_n DC 0",
        f"Cmass vel 0 {_num(mass_kg)}",
        f"Bforce 0 vel I = {pwl(F0_N)} + I(Vsense) * ({pwl(Fk_N_per_A)})",
        f"Igravity vel 0 DC {_num(mg)}",
        "Cpos pos 0 1",
        "Bint 0 pos I = V(vel)",
        "Rleak_pos pos 0 1e12",
        "Rleak_vel vel 0 1e12",
        f".ends {sub}",
    ]
    return "\n".join(lines) + "\n"
