"""The example study through a real SLURM controller equals the local run, bit for bit.

Needs a running cluster: `bash .ci/slurm-setup` (root) starts a one-node
SLURM on localhost; run with `pytest -m slurm`.
"""

import importlib.util
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
import yaml

from famwise.cli import main
from famwise.demo import write_demo

pytestmark = [pytest.mark.slurm, pytest.mark.workflow]

PROFILE = Path(__file__).resolve().parents[1] / "configs" / "profiles" / "slurm"
# Fewer permutations than the example's 1000 keep the test short; still two shards.
PERMUTATIONS = 200
# Poll the queue often: this cluster runs the jobs at once (the profile keeps the plugin's default).
FAST_POLLING = ["--slurm-init-seconds-before-status-checks", "2"]


def _cluster_problem() -> str | None:
    """Why the SLURM test cannot run here (None when it can)."""
    if shutil.which("sinfo") is None or shutil.which("sbatch") is None:
        return "no SLURM client (sinfo, sbatch) on this machine; run `bash .ci/slurm-setup` as root first"
    if importlib.util.find_spec("snakemake_executor_plugin_slurm") is None:
        return "the SLURM executor plugin is not installed: pip install 'famwise[slurm]'"
    try:
        states = subprocess.run(["sinfo", "-h", "-o", "%t"], capture_output=True, text=True, timeout=20)
    except subprocess.TimeoutExpired:
        return "sinfo did not answer within 20 s: the SLURM controller is not up"
    if states.returncode != 0:
        return f"the SLURM controller is not up (sinfo: {states.stderr.strip()})"
    if not {"idle", "mix", "alloc"} & set(states.stdout.split()):
        return f"no SLURM node is up (sinfo states: {states.stdout.split()})"
    return None


def _results(output: Path) -> dict[str, dict[str, np.ndarray]]:
    """Every result.npz under ``output``, by path relative to it."""
    found = {}
    for path in sorted(output.glob("contrasts/*/*/result.npz")):
        with np.load(path, allow_pickle=False) as archive:
            found[str(path.relative_to(output))] = {key: archive[key] for key in archive.files}
    return found


def test_slurm_run_equals_local_run(tmp_path):
    problem = _cluster_problem()
    if problem:
        pytest.skip(problem)
    spec = write_demo(tmp_path / "study")
    study = yaml.safe_load(spec.read_text())
    study["inference"]["permutations"] = PERMUTATIONS
    spec.write_text(yaml.safe_dump(study, sort_keys=False))
    assert study["inference"]["shards"] == 2
    output = spec.parent / study["output"]

    assert main(["run", str(spec), "--cores", "2"]) == 0
    local = _results(output)
    output.rename(spec.parent / "results-local")

    assert main(["run", str(spec), "--profile", str(PROFILE), "--", *FAST_POLLING]) == 0
    cluster = _results(output)

    # Every job ran as a SLURM job: the executor's job logs are there, and ours still go to <output>/logs.
    slurm_logs = list((output / ".snakemake" / "slurm_logs").rglob("*.log"))
    assert any("decompose" in str(p) for p in slurm_logs) and any("null_shard" in str(p) for p in slurm_logs)
    assert sorted(p.name for p in (output / "logs" / "null_shard").glob("*.log")) == [
        f"{c}-{k}.log" for c in ("high-load-vs-baseline", "load-effect") for k in (0, 1)
    ]
    assert (output / "report" / "index.html").is_file()

    # 2 contrasts x 6 corrections, identical masks and corrected p-values (the seed fixes the table).
    assert len(local) == 12 and sorted(cluster) == sorted(local)
    for name, arrays in local.items():
        for key in ("mask", "p_corrected"):
            assert key in arrays, f"{name} has no {key}"
            np.testing.assert_array_equal(cluster[name][key], arrays[key], err_msg=f"{name} {key}")
    assert any(arrays["mask"].any() for arrays in local.values()), "the example's effect should be found"
