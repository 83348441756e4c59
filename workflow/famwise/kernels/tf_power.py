"""numba kernels of the time-frequency decomposition: power of complex coefficients summed over epochs in one pass."""

import numpy as np

from famwise.kernels._jit import jit


@jit
def _add_mean_power(
    coef: np.ndarray, row_start: int, row_stop: int, t_start: int, t_step: int, weight: float, out: np.ndarray
) -> None:
    """out[f, j] += weight * mean over rows r of |coef[r, f, t_start + j t_step]|^2.

    coef : complex64 (n_rows, n_freqs, n_fft), C-contiguous; out : float64 (n_freqs, n_out).
    """
    scale = weight / (row_stop - row_start)
    n_freqs, n_out = out.shape
    for r in range(row_start, row_stop):
        for f in range(n_freqs):
            for j in range(n_out):
                v = coef[r, f, t_start + j * t_step]
                out[f, j] += scale * (v.real * v.real + v.imag * v.imag)


@jit
def _add_epoch_power(
    coef: np.ndarray, row_start: int, t_start: int, t_step: int, weight: float, out: np.ndarray
) -> None:
    """out[r, f, j] += weight * |coef[row_start + r, f, t_start + j t_step]|^2.

    coef : complex64 (n_rows, n_freqs, n_fft), C-contiguous;
    out : float32 (n_epochs, n_freqs, n_out).
    """
    n_epochs, n_freqs, n_out = out.shape
    for r in range(n_epochs):
        for f in range(n_freqs):
            for j in range(n_out):
                v = coef[row_start + r, f, t_start + j * t_step]
                out[r, f, j] += weight * (v.real * v.real + v.imag * v.imag)
