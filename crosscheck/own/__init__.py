"""The own route: phasor MNA assembly, sparse back ends, the compiled sweep loop, singular diagnosis, Thevenin and Norton equivalents."""
