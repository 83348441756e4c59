# Calibration stage (`famwise calibrate SPEC`): null datasets from the subjects' own maps
# -> empirical error rate of every correction. `rule all` does not ask for it.
# Sizes come from the command line: --config calibrate_datasets=N calibrate_permutations=M calibrate_chunks=K
from famwise.calibrate.settings import calibration_settings as _calibration_settings

CALIBRATE_DATASETS = int(config.get("calibrate_datasets", 100))
CALIBRATE_CHUNKS = int(config.get("calibrate_chunks", min(10, CALIBRATE_DATASETS)))
CALIBRATE_PERMUTATIONS = config.get("calibrate_permutations")  # None: the study's own number
CALIBRATE = f"{PYTHON} -m famwise.calibrate"


def calibration_settings(wildcards):
    return _calibration_settings(PLAN, wildcards.contrast, datasets=CALIBRATE_DATASETS,
                                 permutations=None if CALIBRATE_PERMUTATIONS is None else int(CALIBRATE_PERMUTATIONS),
                                 chunks=CALIBRATE_CHUNKS)


def calibration_chunk_files(wildcards):
    return [f"calibration/{wildcards.contrast}/chunk-{k}.npz" for k in range(CALIBRATE_CHUNKS)]


rule calibrate_chunk:
    input:
        subjects="contrasts/{contrast}/subjects.npz",
        graph=graph_files,
    output:
        "calibration/{contrast}/chunk-{chunk}.npz",
    log:
        "logs/calibrate_chunk/{contrast}-{chunk}.log",
    benchmark:
        "logs/calibrate_chunk/{contrast}-{chunk}.benchmark.tsv",
    params:
        settings=calibration_settings,
    wildcard_constraints:
        chunk="[0-9]+",
    threads: 1
    shell:
        "{CALIBRATE} chunk --settings {params.settings:q} --chunk {wildcards.chunk} "
        "--subjects {input.subjects} --graph '{input.graph}' --out {output} > {log} 2>&1"


rule calibrate_table:
    input:
        chunks=calibration_chunk_files,
        subjects="contrasts/{contrast}/subjects.npz",
        observed="contrasts/{contrast}/observed.npz",
    output:
        table="calibration/{contrast}.tsv",
        sidecar="calibration/{contrast}.json",
        figure="calibration/{contrast}.png",
        vector="calibration/{contrast}.svg",
    log:
        "logs/calibrate_table/{contrast}.log",
    benchmark:
        "logs/calibrate_table/{contrast}.benchmark.tsv",
    params:
        settings=calibration_settings,
    shell:
        "{CALIBRATE} table --settings {params.settings:q} --subjects {input.subjects} --observed {input.observed} "
        "--out {output.table} {input.chunks} > {log} 2>&1"
