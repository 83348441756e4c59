# Power stage (`famwise power SPEC`): studies simulated from the study's own maps
# -> the power of every correction per sample size. `rule all` does not ask for it.
# The command line may override the spec's power section:
#   --config power_sizes=12,20,28 power_studies=N
from famwise.power.settings import power_shard_settings as _power_shard_settings
from famwise.power.settings import power_spec as _power_spec
from famwise.power.settings import power_table_settings as _power_table_settings
from famwise.power.settings import shard_files as _power_shard_files


def _power():
    sizes = config.get("power_sizes")
    return _power_spec(PLAN, sizes=[int(n) for n in str(sizes).split(",")] if sizes else None,
                       studies=int(config["power_studies"]))


def _shard(wildcards):
    return _power_shard_settings(PLAN, _power(), wildcards.contrast, wildcards.effect, int(wildcards.size))


def power_shard_settings(wildcards):
    return to_json(_shard(wildcards))


def power_table_settings(wildcards):
    return to_json(_power_table_settings(PLAN, _power(), wildcards.contrast))


def power_shard_mem_mb(wildcards, attempt):
    return sizing.power_shard_mem_mb(PLAN, _shard(wildcards)) * attempt


def power_shard_runtime(wildcards, attempt):
    return sizing.power_shard_runtime_min(PLAN, _shard(wildcards)) * attempt


def power_shard_inputs(wildcards):
    return _power_shard_files(_power(), wildcards.contrast)


rule power_shard:
    input:
        subjects=layout.contrast_data("{contrast}"),
        graph=graph_files,
    output:
        layout.power_shard("{contrast}", "{effect}", "{size}", "{shard}"),
    log:
        layout.log("power_shard", "{contrast}-{effect}-n{size}-{shard}"),
    benchmark:
        layout.job_benchmark("power_shard", "{contrast}-{effect}-n{size}-{shard}"),
    params:
        settings=power_shard_settings,
    wildcard_constraints:
        effect="(pilot-x|d-)[-0-9.e+]+",
        size="[0-9]+",
        shard="[0-9]+",
    threads: 1
    resources:
        mem_mb=power_shard_mem_mb,
        runtime=power_shard_runtime,
    shell:
        "{JOB} power-shard --settings {params.settings:q} --shard {wildcards.shard} "
        "--subjects {input.subjects} --graph '{input.graph}' --out {output} > {log} 2>&1"


rule power_table:
    input:
        shards=power_shard_inputs,
        subjects=layout.contrast_data("{contrast}"),
    output:
        **layout.power_files("{contrast}"),
    log:
        layout.log("power_table", "{contrast}"),
    benchmark:
        layout.job_benchmark("power_table", "{contrast}"),
    params:
        settings=power_table_settings,
    resources:
        mem_mb=report_mem_mb,
        runtime=report_runtime,
    shell:
        "{JOB} power-table --settings {params.settings:q} --subjects {input.subjects} "
        "--out {output.table} {input.shards} > {log} 2>&1"
