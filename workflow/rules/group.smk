# Group stage: per-subject maps -> one contrast's subject maps -> observed statistics.


rule contrast_data:
    input:
        maps=contrast_map_files,
        info=contrast_info_files,
    output:
        layout.contrast_data("{contrast}"),
    log:
        layout.log("contrast_data", "{contrast}"),
    benchmark:
        layout.job_benchmark("contrast_data", "{contrast}"),
    params:
        settings=contrast_settings,
    resources:
        mem_mb=contrast_data_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{JOB} contrast-data --settings {params.settings:q} --out {output} {input.maps} > {log} 2>&1"


rule observed:
    input:
        layout.contrast_data("{contrast}"),
    output:
        layout.observed("{contrast}"),
    log:
        layout.log("observed", "{contrast}"),
    benchmark:
        layout.job_benchmark("observed", "{contrast}"),
    params:
        settings=observed_settings,
    resources:
        mem_mb=observed_mem_mb,
        runtime=group_job_runtime,
    shell:
        "{JOB} observed --settings {params.settings:q} --subjects {input} --out {output} > {log} 2>&1"
