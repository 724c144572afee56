"""numba kernels: arrays and scalars in, preallocated outputs, no validation, no RNG, no labels."""
