# Report stage: every result -> report/index.html, figures, methods.md, provenance.json.


rule report:
    input:
        "subjects.tsv",
        graph_files,
        PLAN.result_files(),
        subject_value_files(),
        null_info_files,
    output:
        "report/index.html",
        "report/methods.md",
        "report/provenance.json",
    log:
        "logs/report/all.log",
    benchmark:
        "logs/report/all.benchmark.tsv",
    params:
        settings=report_settings,
    resources:
        mem_mb=report_mem_mb,
        runtime=report_runtime,
    shell:
        "{JOB} report --settings {params.settings:q} > {log} 2>&1"
