"""What a null shard gathers for each correction, one collector per kind.

- `protocol`: the collector protocol and how shard arrays merge;
- `exceedance`: per-point exceedance counts (permutation p-values);
- `maxima`: per-row maxima and per-point successive-maxima counts (max-statistic, step-down);
- `largest_cluster`: the largest cluster statistic per row (cluster inference);
- `largest_tfce`: the largest |TFCE| per row (TFCE inference);
- `kernel_inputs`: checked inputs of the cluster and TFCE kernels, shared with their inference.
"""
