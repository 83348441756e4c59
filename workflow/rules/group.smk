# Group stage: per-subject maps -> one contrast's subject maps -> observed statistics.


rule contrast_data:
    input:
        contrast_map_files,
    output:
        "contrasts/{contrast}/subjects.npz",
    log:
        "logs/contrast_data/{contrast}.log",
    params:
        settings=contrast_settings,
    shell:
        "{JOB} contrast-data --settings {params.settings:q} --out {output} {input} > {log} 2>&1"


rule observed:
    input:
        "contrasts/{contrast}/subjects.npz",
    output:
        "contrasts/{contrast}/observed.npz",
    log:
        "logs/observed/{contrast}.log",
    params:
        settings=observed_settings,
    shell:
        "{JOB} observed --settings {params.settings:q} --subjects {input} --out {output} > {log} 2>&1"
