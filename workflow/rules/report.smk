# Report stage: every result -> report/index.html, figures, methods.md, provenance.json.


rule study_record:
    output:
        layout.STUDY_RECORD,
    log:
        layout.log("study_record", "all"),
    benchmark:
        layout.job_benchmark("study_record", "all"),
    params:
        settings=study_record_settings,
    resources:
        mem_mb=small_job_mem_mb,
        runtime=small_job_runtime,
    shell:
        "{JOB} study-record --settings {params.settings:q} --out {output} > {log} 2>&1"


rule report:
    input:
        report_input_files,
    output:
        layout.REPORT_PAGE,
        layout.REPORT_METHODS,
        layout.REPORT_PROVENANCE,
    log:
        layout.log("report", "all"),
    benchmark:
        layout.job_benchmark("report", "all"),
    params:
        settings=report_settings,
    resources:
        mem_mb=report_mem_mb,
        runtime=report_runtime,
    shell:
        "{JOB} report --settings {params.settings:q} > {log} 2>&1"
