"""Floor 2, the own route: phasor MNA and the equivalents it gives.

For the rest of the project: ``equivalent`` (thevenin, Equivalent, ElementForm), ``solver`` (MnaSystem),
``assembly`` (Stamps: the element stamps, a seam for deliberate faults). Imports only floors 0 and 1.
"""
