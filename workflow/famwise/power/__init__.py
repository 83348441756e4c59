"""``famwise power``: the power of every configured correction, simulated from a pilot's own maps.

For each contrast, effect level and sample size, studies are simulated by
resampling the pilot's residual maps and adding a known effect inside a
region (`famwise.power.simulate`); each goes through the study's own
statistic, permutation null and corrections, as in the calibration
(`famwise.power.chunk`). The table (`famwise.power.table`), the power
curves (`famwise.power.curves`) and the words for a proposal and the report
(`famwise.power.text`) come from the chunk files; `famwise.power.settings` is
light enough for the Snakefile; ``python -m famwise.power`` is the job entry
of the power rules.
"""
