# Power stage (`famwise power SPEC`): studies simulated from the study's own maps
# -> the power of every correction per sample size. `rule all` does not ask for it.
# The command line may override the spec's power section:
#   --config power_sizes=12,20,28 power_studies=N
from famwise.power.settings import chunk_files as _power_chunk_files
from famwise.power.settings import chunk_settings as _power_chunk_settings
from famwise.power.settings import power_spec as _power_spec
from famwise.power.settings import table_settings as _power_table_settings

POWER = f"{PYTHON} -m famwise.power"


def _power():
    sizes = config.get("power_sizes")
    studies = config.get("power_studies")
    return _power_spec(PLAN, sizes=[int(n) for n in str(sizes).split(",")] if sizes else None,
                       studies=None if studies is None else int(studies))


def power_chunk_settings(wildcards):
    return _power_chunk_settings(PLAN, _power(), wildcards.contrast, wildcards.effect, int(wildcards.size))


def power_table_settings(wildcards):
    return _power_table_settings(PLAN, _power(), wildcards.contrast)


def power_chunk_inputs(wildcards):
    return _power_chunk_files(_power(), wildcards.contrast)


rule power_chunk:
    input:
        subjects="contrasts/{contrast}/subjects.npz",
        graph=graph_files,
    output:
        "power/{contrast}/{effect}/n{size}/chunk-{chunk}.npz",
    log:
        "logs/power_chunk/{contrast}-{effect}-n{size}-{chunk}.log",
    benchmark:
        "logs/power_chunk/{contrast}-{effect}-n{size}-{chunk}.benchmark.tsv",
    params:
        settings=power_chunk_settings,
    wildcard_constraints:
        effect="(pilot-x|d-)[-0-9.e+]+",
        size="[0-9]+",
        chunk="[0-9]+",
    threads: 1
    shell:
        "{POWER} chunk --settings {params.settings:q} --chunk {wildcards.chunk} "
        "--subjects {input.subjects} --graph '{input.graph}' --out {output} > {log} 2>&1"


rule power_table:
    input:
        chunks=power_chunk_inputs,
        subjects="contrasts/{contrast}/subjects.npz",
    output:
        table="power/{contrast}.tsv",
        sidecar="power/{contrast}.json",
        figure="power/{contrast}.png",
        vector="power/{contrast}.svg",
        methods="power/{contrast}.md",
    log:
        "logs/power_table/{contrast}.log",
    benchmark:
        "logs/power_table/{contrast}.benchmark.tsv",
    params:
        settings=power_table_settings,
    shell:
        "{POWER} table --settings {params.settings:q} --subjects {input.subjects} "
        "--out {output.table} {input.chunks} > {log} 2>&1"
