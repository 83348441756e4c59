"""``famwise calibrate``: the error rates of the study's corrections on its own data.

For each contrast, N null datasets are made from the subjects' own maps, every
configured correction is applied to each with the study's settings, and the
share of datasets with any detection is the empirical family-wise error rate.
The datasets are computed in shards, one file each
(``<output>/calibration/<contrast>/shard-<k>.npz``), so an interrupted run
resumes without recomputing finished shards; the result does not depend on
the number of shards.

Modules: `famwise.calibrate.settings` (the settings, light enough for the
Snakefile), `famwise.calibrate.datasets` (null datasets and shards),
`famwise.calibrate.table` (table, figure); the report's section is
`famwise.report.calibration`; the jobs are ``calibrate-shard`` and
``calibrate-table`` of ``famwise.jobs``.
"""

from famwise.calibrate.settings import UNCORRECTED, calibration_settings
from famwise.calibrate.table import CalibrationRow, fwer_interval, summarize

__all__ = ["UNCORRECTED", "CalibrationRow", "calibration_settings", "fwer_interval", "summarize"]
