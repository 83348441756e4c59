"""famwise power through Snakemake: shards as jobs, only new sample sizes rerun, the command's output, the report."""

import pytest

import famwise.cli
from famwise.power.table import read_table

from conftest import write_tiny_study

pytestmark = pytest.mark.workflow

POWER = """
power:
  sample_sizes: [6, 10]
  studies: 4
  shards: 2
  effect: {source: specified, d: [1.5], channels: [Fz], time_ms: [0, 400]}
"""


@pytest.fixture(scope="module")
def planned(tmp_path_factory):
    root = tmp_path_factory.mktemp("power")
    spec = write_tiny_study(
        root / "study", n_subjects=6, permutations=31, corrections="- method: bonferroni\n- method: max-stat\n"
    )
    spec.write_text(spec.read_text() + POWER)
    return spec


def test_power_writes_table_figure_methods_and_reruns_only_new_sizes(planned, capsys):
    spec = planned
    assert famwise.cli.main(["power", str(spec), "--cores", "2"]) == 0
    out, err = capsys.readouterr()
    folder = spec.parent / "results" / "power"
    rows = read_table(folder / "high-vs-low.tsv")
    assert [(r["n"], r["correction"]) for r in rows][:3] == [(6, "uncorrected"), (6, "bonferroni"), (6, "max-stat")]
    assert {r["n"] for r in rows} == {6, 10} and all(r["studies"] == 4 for r in rows)
    for stem in ("high-vs-low.json", "high-vs-low.png", "high-vs-low.svg", "high-vs-low.md"):
        assert (folder / stem).is_file()
    methods = (folder / "high-vs-low.md").read_text()
    assert "detected the effect in" in methods or "did not reach" in methods
    assert "power: 0/8 simulated studies done" in err and "power: 8/8 simulated studies done" in err
    assert (spec.parent / "results" / "logs" / "power_shard" / "high-vs-low-d-1.5-n6-0.benchmark.tsv").is_file()
    shards = folder / "high-vs-low" / "d-1.5"
    before = {p: p.stat().st_mtime_ns for p in shards.rglob("shard-*.npz")}
    assert famwise.cli.main(["power", str(spec), "--sizes", "6,10,14", "--cores", "2"]) == 0
    out, err = capsys.readouterr()
    assert out.count("power_shard") == 2 and "size=14" in out  # only the new size's two shards ran
    assert "power: 8/12 simulated studies done" in err and "power: 12/12 simulated studies done" in err
    assert all(p.stat().st_mtime_ns == t for p, t in before.items())
    assert {r["n"] for r in read_table(folder / "high-vs-low.tsv")} == {6, 10, 14}


def test_report_shows_the_power_section(planned):
    spec = planned
    assert famwise.cli.main(["run", str(spec), "--cores", "2"]) == 0
    text = (spec.parent / "results" / "report" / "index.html").read_text()
    assert "Power for planning a study" in text and "inflated by selection" in text
    assert "This power table was computed before" not in text  # same pilot maps and corrections


def test_missing_profile_folder_is_one_clear_error(planned, tmp_path, capsys):
    assert famwise.cli.main(["power", str(planned), "--profile", str(tmp_path / "nowhere")]) == 2
    assert "--profile" in capsys.readouterr().err


def test_unknown_effect_channel_is_one_clear_error_before_any_job(tmp_path, capsys):
    spec = write_tiny_study(tmp_path / "study", n_subjects=4)
    spec.write_text(spec.read_text() + POWER.replace("channels: [Fz]", "channels: [Fz, Fzz]"))
    assert famwise.cli.main(["power", str(spec)]) == 2
    err = capsys.readouterr().err
    assert "study.yaml:" in err and "power.effect.channels[1]: 'Fzz' is not an analysed channel" in err
    assert not (tmp_path / "study" / "results" / "logs").exists()


def test_missing_power_section_is_one_clear_error(tmp_path, capsys):
    spec = write_tiny_study(tmp_path / "study", n_subjects=4)
    assert famwise.cli.main(["power", str(spec)]) == 2
    assert "no 'power' section" in capsys.readouterr().err


@pytest.mark.slow
def test_example_study_cluster_and_tfce_beat_max_stat(tmp_path):
    """On the example study's extended frontal-midline theta effect (half the pilot's observed load effect,
    12 participants), cluster and TFCE detect it in more simulated studies than the max-statistic: what is
    common practice to expect for an effect spread over many neighbouring points (common practice, no source)."""
    from dataclasses import replace

    from famwise import layout
    from famwise.demo import write_demo
    from famwise.launch import run_snakemake
    from famwise.plan import Plan
    from famwise.power.settings import power_shard_settings, power_spec
    from famwise.power.shard import power_shard

    plan = Plan.from_spec(write_demo(tmp_path / "example"))
    targets = [layout.contrast_data("load-effect"), layout.CHANNEL_GRAPH]
    code, lines = run_snakemake(plan, ["--cores", "2", *targets], capture=True)
    assert code == 0, "\n".join(lines[-20:])
    settings = power_shard_settings(plan, power_spec(plan), "load-effect", "pilot-x0.5", 12)
    output = plan.loaded.output
    found = power_shard(
        output / targets[0], output / targets[1], shard=0, settings=replace(settings, studies=80, shards=1)
    )
    power = dict(zip([str(x) for x in found["labels"]], found["detected"].mean(axis=0)))
    assert power["cluster"] > power["max-stat"] and power["tfce"] > power["max-stat"], power
