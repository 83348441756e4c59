"""Every path of a run's output tree, relative to the output folder.

The plan, the Snakemake rules and the stages take their paths from here. Each
function also gives the rule's pattern when called with a wildcard, e.g.
``observed("{contrast}")`` -> ``"contrasts/{contrast}/observed.npz"``.
"""

STUDY_RECORD = "study.json"
"""The validated spec as JSON (what the report and calibration show)."""
SUBJECTS_TABLE = "subjects.tsv"
CHANNEL_GRAPH = "channels/graph.npz"
REPORT_PAGE = "report/index.html"
REPORT_METHODS = "report/methods.md"
REPORT_PROVENANCE = "report/provenance.json"


def tf_map(subject: str) -> str:
    """One subject's time-frequency maps."""
    return f"tf/sub-{subject}.npz"


def tf_sidecar(subject: str) -> str:
    """One subject's epoch counts and sampling rate."""
    return f"tf/sub-{subject}.json"


def contrast_folder(contrast: str) -> str:
    return f"contrasts/{contrast}"


def contrast_data(contrast: str) -> str:
    """One contrast's subject maps in the analysis region."""
    return f"contrasts/{contrast}/subjects.npz"


def observed(contrast: str) -> str:
    """One contrast's observed statistics (and derived forming thresholds)."""
    return f"contrasts/{contrast}/observed.npz"


def null_info(contrast: str) -> str:
    """Size and kind of one contrast's permutation table, smallest attainable p."""
    return f"contrasts/{contrast}/nulls/info.json"


def null_shard(contrast: str, shard) -> str:
    return f"contrasts/{contrast}/nulls/shard-{shard}.npz"


def family_shard(label: str, shard) -> str:
    """Joint step-down shard of a correction ranked over every contrast."""
    return f"family/{label}/shard-{shard}.npz"


def result(contrast: str, label: str) -> str:
    return f"contrasts/{contrast}/{label}/result.npz"


def cluster_table(contrast: str, label: str) -> str:
    """clusters.tsv of a cluster or TFCE correction (its sidecar: :func:`cluster_sidecar`)."""
    return f"contrasts/{contrast}/{label}/clusters.tsv"


def cluster_sidecar(contrast: str, label: str) -> str:
    return f"contrasts/{contrast}/{label}/clusters.json"


def subject_values(contrast: str, label: str) -> str:
    """Each subject's mean over every significant cluster or region (sidecar: same name, .json)."""
    return f"contrasts/{contrast}/{label}/subject_values.tsv"


def planned_values(contrast: str) -> str:
    """Each subject's mean over every planned region of the spec (sidecar: same name, .json)."""
    return f"contrasts/{contrast}/planned_values.tsv"


def sidecar_of(table: str) -> str:
    """The JSON sidecar of a TSV table."""
    return table.removesuffix(".tsv") + ".json"


def calibration_shard(contrast: str, shard) -> str:
    return f"calibration/{contrast}/shard-{shard}.npz"


def calibration_files(contrast: str) -> dict[str, str]:
    """The calibration table of one contrast, its sidecar and its figure (PNG, SVG)."""
    return {
        kind: f"calibration/{contrast}.{suffix}"
        for kind, suffix in (("table", "tsv"), ("sidecar", "json"), ("figure", "png"), ("vector", "svg"))
    }


def power_shard(contrast: str, effect: str, n, shard) -> str:
    """Simulated studies of one contrast, effect level (its tag) and sample size, one shard of them."""
    return f"power/{contrast}/{effect}/n{n}/shard-{shard}.npz"


def power_files(contrast: str) -> dict[str, str]:
    """The power table of one contrast, its sidecar, its figure (PNG, SVG) and its methods paragraph."""
    return {
        kind: f"power/{contrast}.{suffix}"
        for kind, suffix in (
            ("table", "tsv"),
            ("sidecar", "json"),
            ("figure", "png"),
            ("vector", "svg"),
            ("methods", "md"),
        )
    }


def log(rule: str, name: str) -> str:
    return f"logs/{rule}/{name}.log"


def job_benchmark(rule: str, name: str) -> str:
    """Snakemake's record of a job's wall time and peak memory, beside its log."""
    return f"logs/{rule}/{name}.benchmark.tsv"
