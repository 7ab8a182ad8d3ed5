"""Shared test helpers: the example paths and a minimal valid geometry text to mutate."""

from __future__ import annotations

from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
#: the example geometry files (requirement files of `hoverfield size` sit beside them, named requirement_*)
EXAMPLES = sorted(p for p in (ROOT / "geometries").glob("*.toml") if not p.name.startswith("requirement_"))
REQUIREMENTS = sorted((ROOT / "geometries").glob("requirement_*.toml"))
SUSPENSION = ROOT / "geometries" / "suspension.toml"
REPULSIVE = ROOT / "geometries" / "repulsive_base.toml"

MINIMAL = '''
name = "minimal"
invented = true

[[coils]]
name = "c"
inner_radius = "5 mm"
outer_radius = "15 mm"
height = "20 mm"
turns = 500
position = ["0 mm", "0 mm", "30 mm"]
nominal_current = "0.5 A"
max_current = "1 A"

[floater]
[[floater.magnets]]
shape = "cylinder"
diameter = "10 mm"
height = "5 mm"
grade = "N42"

[study]
gap_min = "3 mm"
gap_max = "20 mm"
supply_voltage = "12 V"
'''
