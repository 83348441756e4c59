"""numba kernels, kept apart from the API, all compiled with the options of `famwise.kernels._jit`.

- `components`: connected components of supra-threshold points (cluster inference);
- `tfce_sweep`: TFCE by one sweep over the points in level order;
- `resampled_stats`: statistics of blocks of resampled data sets (the permutation engine);
- `row_maxima`: row maxima and successive-maxima counts (max-statistic collectors);
- `tf_power`: power of complex coefficients summed over epochs (time-frequency decomposition).
"""
