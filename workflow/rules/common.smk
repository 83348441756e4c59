# Helpers that compute targets and inputs from the plan (no statistics here).
import re

from famwise import layout
from famwise.settings_codec import to_json


def _alternatives(names):
    return "|".join(re.escape(name) for name in names) or "(?!)"


wildcard_constraints:
    subject="[A-Za-z0-9]+",
    shard="[0-9]+",
    contrast=_alternatives([c.name for c in PLAN.study.contrasts]),


def subject_input_files(wildcards):
    return [PLAN.loaded.run_path(f) for f in PLAN.input_files(wildcards.subject)]


def first_subject_map(wildcards):
    return layout.tf_map(PLAN.subjects[0])


def contrast_map_files(wildcards):
    return PLAN.contrast_inputs(wildcards.contrast)


def contrast_info_files(wildcards):
    return [layout.tf_sidecar(s) for s in PLAN.contrast_settings(wildcards.contrast).subjects]


def correction_input_files(wildcards):
    return PLAN.correction_inputs(wildcards.contrast, wildcards.correction)


def graph_files(wildcards):
    return [layout.CHANNEL_GRAPH] if PLAN.needs_graph else []


def report_input_files(wildcards):
    return PLAN.report_inputs()


# Settings travel as deterministic JSON text (famwise.settings_codec), passed through
# functions: Snakemake would otherwise read the braces of the JSON text as wildcards.
def decompose_settings(wildcards):
    return to_json(PLAN.decompose_settings())


def subjects_table_settings(wildcards):
    return to_json(PLAN.subjects_table_settings())


def graph_settings(wildcards):
    return to_json(PLAN.graph_settings())


def contrast_settings(wildcards):
    return to_json(PLAN.contrast_settings(wildcards.contrast))


def observed_settings(wildcards):
    return to_json(PLAN.observed_settings())


def null_settings(wildcards):
    return to_json(PLAN.null_settings())


def correction_settings(wildcards):
    return to_json(PLAN.correction_settings(wildcards.correction))


def study_record_settings(wildcards):
    return to_json(PLAN.study_record_settings())


def report_settings(wildcards):
    return to_json(PLAN.report_settings())


# Scheduler resources (memory in MB, runtime in minutes) estimated from the study's
# sizes by famwise.scheduler_sizing; a retried job asks for more memory and time.
import famwise.scheduler_sizing as sizing


def decompose_mem_mb(wildcards, attempt):
    return sizing.decompose_mem_mb(PLAN, wildcards.subject) * attempt


def decompose_runtime(wildcards, attempt):
    return sizing.decompose_runtime_min(PLAN, wildcards.subject) * attempt


def small_job_mem_mb(wildcards, attempt):
    return sizing.small_mem_mb(PLAN) * attempt


def small_job_runtime(wildcards, attempt):
    return sizing.small_runtime_min(PLAN) * attempt


def contrast_data_mem_mb(wildcards, attempt):
    return sizing.contrast_data_mem_mb(PLAN) * attempt


def observed_mem_mb(wildcards, attempt):
    return sizing.observed_mem_mb(PLAN) * attempt


def group_job_runtime(wildcards, attempt):
    return sizing.group_runtime_min(PLAN) * attempt


def null_shard_mem_mb(wildcards, attempt):
    return sizing.null_shard_mem_mb(PLAN) * attempt


def null_shard_runtime(wildcards, attempt):
    return sizing.null_shard_runtime_min(PLAN) * attempt


def correct_mem_mb(wildcards, attempt):
    return sizing.correct_mem_mb(PLAN, wildcards.correction) * attempt


def correct_runtime(wildcards, attempt):
    return sizing.correct_runtime_min(PLAN, wildcards.correction) * attempt


def report_mem_mb(wildcards, attempt):
    return sizing.report_mem_mb(PLAN) * attempt


def report_runtime(wildcards, attempt):
    return sizing.report_runtime_min(PLAN) * attempt


def family_shard_inputs(wildcards):
    return PLAN.family_shard_inputs()
