# Helpers that compute targets and inputs from the plan (no statistics here).
import re


def _alternatives(names):
    return "|".join(re.escape(name) for name in names) or "(?!)"


wildcard_constraints:
    subject="[A-Za-z0-9]+",
    shard="[0-9]+",
    contrast=_alternatives([c.name for c in PLAN.study.contrasts]),


def subject_input_files(wildcards):
    return PLAN.input_files(wildcards.subject)


def first_subject_map(wildcards):
    return f"tf/sub-{PLAN.subjects[0]}.npz"


def contrast_map_files(wildcards):
    return PLAN.contrast_inputs(wildcards.contrast)


def contrast_settings(wildcards):
    return PLAN.contrast_settings(wildcards.contrast)


def correction_input_files(wildcards):
    return PLAN.correction_inputs(wildcards.contrast, wildcards.correction)


def correction_settings(wildcards):
    return PLAN.correction_settings(wildcards.correction)


def graph_files(wildcards):
    return ["channels/graph.npz"] if PLAN.needs_graph else []


def null_info_files(wildcards):
    if not PLAN.study.inference.needs_null:
        return []
    return [f"contrasts/{c.name}/nulls/info.json" for c in PLAN.study.contrasts]


# Settings are passed through functions: Snakemake would otherwise read the braces
# of the JSON text as wildcards.
def decompose_settings(wildcards):
    return PLAN.decompose_settings()


def subjects_table_settings(wildcards):
    return PLAN.subjects_table_settings()


def graph_settings(wildcards):
    return PLAN.graph_settings()


def observed_settings(wildcards):
    return PLAN.observed_settings()


def null_settings(wildcards):
    return PLAN.null_settings()


def report_settings(wildcards):
    return PLAN.report_settings()
