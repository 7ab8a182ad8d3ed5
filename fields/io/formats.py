"""Text formats for other tools: C header arrays for firmware, a SPICE subcircuit of the plant.

Pure functions from arrays to text (no file IO). Numbers are written with 17 significant digits
so that reading them back gives the same binary64 values.
"""

from __future__ import annotations

import re

import numpy as np

from fields import __version__


def _c_ident(name: str) -> str:
    s = re.sub(r"[^0-9a-zA-Z_]", "_", name).strip("_").upper()
    return ("HF_" + s) if not s or s[0].isdigit() else s


def _num(x: float) -> str:
    return f"{float(x):.17g}"


def c_header(design_name: str, arrays: dict[str, np.ndarray], units: dict[str, str], notes: list[str]) -> str:
    """A C header of ``static const double`` arrays (1-D or 2-D), one per entry of ``arrays``.

    The header names the design, the tool version, each array's unit, and an interpolation note.
    """
    guard = _c_ident(f"hoverfield_{design_name}_tables_h")
    lines = [
        "/*",
        f" * hoverfield {__version__} force and stiffness tables for design '{design_name}'.",
        " * Generated file: do not edit; re-run the tool instead. SI units (see each array).",
    ]
    lines += [f" * {n}" for n in notes]
    lines += [" */", f"#ifndef {guard}", f"#define {guard}", ""]
    for name, arr in arrays.items():
        a = np.asarray(arr, float)
        cname = _c_ident(name)
        lines.append(f"/* {name}: {units.get(name, '')} */")
        if a.ndim == 1:
            lines.append(f"#define {cname}_LEN {a.shape[0]}")
            lines.append(f"static const double {cname}[{a.shape[0]}] = {{")
            lines += _wrap([_num(x) for x in a])
            lines.append("};")
        elif a.ndim == 2:
            lines.append(f"#define {cname}_ROWS {a.shape[0]}")
            lines.append(f"#define {cname}_COLS {a.shape[1]}")
            lines.append(f"static const double {cname}[{a.shape[0]}][{a.shape[1]}] = {{")
            for row in a:
                lines.append("    {")
                lines += _wrap([_num(x) for x in row], indent=8)
                lines.append("    },")
            lines.append("};")
        else:
            raise ValueError(f"c_header: array {name} must be 1-D or 2-D; got {a.ndim}-D")
        lines.append("")
    lines.append(f"#endif /* {guard} */")
    return "\n".join(lines) + "\n"


def _wrap(items: list[str], indent: int = 4, per_line: int = 4) -> list[str]:
    out = []
    for i in range(0, len(items), per_line):
        out.append(" " * indent + ", ".join(items[i:i + per_line]) + ",")
    return out


def parse_c_header(text: str) -> dict[str, np.ndarray]:
    """Read back the arrays of a header written by :func:`c_header` (for round-trip checks)."""
    out = {}
    body = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
    for m in re.finditer(r"static const double (\w+)((?:\[\d+\])+) = \{(.*?)\};", body, flags=re.S):
        name, dims, content = m.group(1), m.group(2), m.group(3)
        shape = tuple(int(d) for d in re.findall(r"\[(\d+)\]", dims))
        nums = [float(x) for x in re.findall(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?|[-+]?inf|nan", content)]
        out[name] = np.array(nums, float).reshape(shape)
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
