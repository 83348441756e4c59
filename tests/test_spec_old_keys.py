"""A spec written with a key or value of earlier versions fails with one line naming the new key.

The old specs are built from the table itself (famwise.spec.old_keys), so every entry is checked.
"""

import subprocess
import sys

import pytest

from famwise.errors import UserError
from famwise.spec import load_study
from famwise.spec.old_keys import RENAMED_KEYS, RENAMED_VALUES

BASE = """\
version: 1
name: old keys
subjects:
  source: epochs
  path: data/sub-{subject}.npz
conditions:
  high-load: [high]
  low-load: [low]
contrasts:
  - name: load
    test: paired
    conditions: [high-load, low-load]
"""
INFERENCE = "inference:\n  corrections:\n    - method: cluster\n"


def _error(tmp_path, text):
    spec = tmp_path / "study.yaml"
    spec.write_text(text)
    with pytest.raises(UserError) as caught:
        load_study(spec)
    return str(caught.value)


def _nested(path: tuple) -> tuple[str, str]:
    """YAML giving the key at ``path`` (list items as one-item lists) and its dotted location."""
    lines, dotted, indent = [], "", ""
    for depth, part in enumerate(path):
        if part == "*":
            dotted += "[0]"
            continue
        last = depth == len(path) - 1
        item = depth > 0 and path[depth - 1] == "*"
        lines.append(
            f"{indent}{'- method: cluster' + chr(10) + indent + '  ' if item else ''}{part}:{' 1' if last else ''}"
        )
        indent += "    " if item else "  "
        dotted += ("." if dotted else "") + part
    return "\n".join(lines) + "\n", dotted


@pytest.mark.parametrize(("old", "new"), RENAMED_KEYS.items(), ids=[".".join(p) for p in RENAMED_KEYS])
def test_every_old_key_names_its_new_key_and_line(tmp_path, old, new):
    snippet, dotted = _nested(old)
    text = BASE + ("" if old[0] == "inference" else INFERENCE) + snippet
    line = text.count("\n") - snippet.count("\n") + snippet.split(f"{old[-1]}:")[0].count("\n") + 1
    assert _error(tmp_path, text) == f"study.yaml:{line} {dotted}: renamed; write '{new}' instead of '{old[-1]}'"


@pytest.mark.parametrize("key", RENAMED_VALUES)
def test_every_old_value_names_its_new_value(tmp_path, key):
    for old, new in RENAMED_VALUES[key].items():
        text = BASE + INFERENCE
        if key == ("subjects", "source"):
            text = text.replace("source: epochs", f"source: {old}")
        else:
            text += f"{key[0]}:\n  {key[1]}: {old}\n"
        line = text.splitlines().index(next(row for row in text.splitlines() if row.strip() == f"{key[1]}: {old}")) + 1
        assert _error(tmp_path, text) == f"study.yaml:{line} {'.'.join(key)}: '{old}' is now written '{new}'"


def test_every_new_key_exists_in_the_models():
    from famwise.spec.reference import reference_markdown

    reference = reference_markdown()
    for path, new in RENAMED_KEYS.items():
        dotted = ".".join(p for p in path[:-1] if p != "*")
        assert f"`{dotted + '.' if dotted else ''}{new}`" in reference or f"`{new}`" in reference, (path, new)


def test_check_exits_2_with_one_line(tmp_path):
    (tmp_path / "study.yaml").write_text(BASE + INFERENCE + "timefreq:\n  cycles: 5\n")
    result = subprocess.run(
        [sys.executable, "-m", "famwise.cli", "check", str(tmp_path / "study.yaml")], capture_output=True, text=True
    )
    assert result.returncode == 2 and result.stderr.strip().splitlines() == [
        "famwise: error: study.yaml:16 timefreq: renamed; write 'decomposition' instead of 'timefreq'"
    ]
