"""numba kernels: connected components, TFCE. Kept apart from the API."""
