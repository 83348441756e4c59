# famwise workflow entry: load and validate the spec, include the stages, ask for every result.
# Run through `famwise run SPEC`, or directly: snakemake -s Snakefile --config spec=path/to/study.yaml
import sys

from famwise.plan import Plan

PLAN = Plan.from_spec(config["spec"])
PYTHON = sys.executable
JOB = f"{PYTHON} -m famwise.jobs"

workdir: str(PLAN.loaded.output)

include: "common.smk"
include: "timefreq.smk"
include: "group.smk"
include: "nulls.smk"
include: "correct.smk"
include: "report.smk"
include: "calibrate.smk"
include: "power.smk"


rule all:
    input:
        PLAN.final_files(),
    default_target: True
