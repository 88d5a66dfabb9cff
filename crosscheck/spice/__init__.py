"""Floor 2, the reference route: ngspice through PySpice, in sandboxed worker processes.

For the rest of the project: ``workers`` (SpicePool, spice_equivalent), ``engine`` (SpiceResult,
SpicePoint, ngspice_available; the only module that imports PySpice), ``sandbox`` (CaseSolver: the
per-case function a pool's workers call, a seam for tests). Imports only floors 0 and 1.
"""
