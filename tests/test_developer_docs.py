"""DEVELOPERS.md's stage table names the jobs the code has (famwise.jobs.STAGES), each once."""

import re
from pathlib import Path

from famwise.jobs import STAGES


def test_stage_table_names_every_job_of_the_code():
    text = (Path(__file__).parents[1] / "DEVELOPERS.md").read_text(encoding="utf-8")
    table = text[text.index("### Stages and their files") :].split("\n\n")[1]
    rows = [line.split(" | ") for line in table.splitlines()[2:]]
    named = [job for row in rows for job in re.findall(r"`([^`]+)`", row[1])]
    assert sorted(named) == sorted(STAGES)
