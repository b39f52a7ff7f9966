"""Physics kernels and model data: particles, constants, kinematics, phase space, widths, parton
densities, the matrix-element library and the analytic references.

Nothing here knows of cards, event records, files or the command line.
"""
