# famwise workflow entry: load and validate the spec, include the stages, ask for every result.
# Run through `famwise run SPEC`, or directly: snakemake -s Snakefile --config spec=path/to/study.yaml
import sys

from famwise.plan import Plan

PLAN = Plan.from_spec(config["spec"])
PYTHON = sys.executable
JOB = f"{PYTHON} -m famwise.jobs"

workdir: str(PLAN.loaded.output)

include: "common.smk"
include: "decomposition.smk"
include: "group.smk"
include: "nulls.smk"
include: "correct.smk"
include: "values.smk"
include: "report.smk"
# The calibration rules exist only when `famwise calibrate` asks for them: otherwise the
# calibration files are plain inputs of the report, never rebuilt by `famwise run`.
if "calibrate_datasets" in config:

    include: "calibrate.smk"
# Likewise the power rules, only when `famwise power` asks for them.
if "power_studies" in config:

    include: "power.smk"


rule all:
    input:
        PLAN.final_files(),
    default_target: True
