"""Independent axisymmetric finite-element reference for soft-iron levitators (test-side code).

Not part of the ``fields`` package: it shares no code with hoverfield's solver, only reads the
geometry files through the public loader to place the bodies. Regenerate the stored reference
data with ``python -m tests.fe_reference.make`` from the repository root.
"""
