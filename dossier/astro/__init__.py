"""Pure, vectorised kernels on numpy arrays: no I/O, no models, plain floats in fixed units."""
