# Report stage: every result -> report/index.html, figures, methods.md, provenance.json.


rule report:
    input:
        "subjects.tsv",
        graph_files,
        PLAN.result_files(),
        expand("contrasts/{contrast}/nulls/info.json", contrast=[c.name for c in PLAN.study.contrasts]) if PLAN.study.inference.needs_null else [],
    output:
        "report/index.html",
        "report/methods.md",
        "report/provenance.json",
    log:
        "logs/report/all.log",
    params:
        settings=PLAN.report_settings(),
    shell:
        "{JOB} report --settings {params.settings:q} > {log} 2>&1"
