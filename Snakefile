# famwise workflow: a thin entry. The rules ship with the package (workflow/rules).
# Usage: snakemake --config spec=example_study/study.yaml --cores 2   (or: famwise run SPEC)
include: "workflow/rules/main.smk"
