"""hoverfield: design calculations for magnetic levitation devices.

Kept light on purpose: importing ``fields`` does not import magpylib, matplotlib or pint.
Import the compute modules you need (``fields.input.geometry``, ``fields.physics.forces``, ...).
"""

__version__ = "0.1.0"
