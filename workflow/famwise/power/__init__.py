"""``famwise power``: the power of every configured correction, simulated from a pilot's own maps.

For each contrast, effect level and sample size, studies are simulated by
resampling the pilot's residual maps and adding a known effect inside a
region (`famwise.power.simulate`); each goes through the study's own
statistic, permutation null and corrections, as in the calibration
(`famwise.power.shard`). The table (`famwise.power.table`), the power
curves (`famwise.power.curves`) and the words for a proposal
(`famwise.power.text`) come from the shard files; `famwise.power.settings` is
light enough for the Snakefile; the report's section is `famwise.report.power`;
the jobs are ``power-shard`` and ``power-table`` of ``famwise.jobs``.
"""
