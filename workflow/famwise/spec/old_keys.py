"""Keys and values renamed since earlier specs: the one old -> new table, and the check that names the new key.

A spec written with an old key fails with one line giving file, YAML line and
the new key, before validation (so the message is not a bare "unknown key").
"""

import yaml

from famwise.errors import UserError

# Old key -> new key. A key is found by its path with earlier renames already applied to
# the sections above it ("*" stands for any list item).
RENAMED_KEYS = {
    ("timefreq",): "decomposition",
    ("decomposition", "freqs_hz"): "frequencies",
    ("decomposition", "frequencies", "start_hz"): "lowest_hz",
    ("decomposition", "frequencies", "stop_hz"): "highest_hz",
    ("decomposition", "time_bandwidth"): "nw",
    ("decomposition", "window_ms"): "taper_length_ms",
    ("decomposition", "baseline", "single_trial"): "single_epoch",
    ("inference", "corrections", "*", "min_neighbor_channels"): "min_supra_neighbors",
}

# Key path -> {old value: new value}.
RENAMED_VALUES = {
    ("subjects", "source"): {"timefreq": "maps"},
    ("channels", "positions"): {"standard-10-10": "10-10", "standard-10-20": "10-20"},
}


def refuse_old_names(root, file_name: str) -> None:
    """Raise a ``UserError`` at the first old key or value of a composed YAML spec.

    Parameters
    ----------
    root : yaml.Node
        The spec as composed by ``yaml.compose`` (nodes carry their lines).
    file_name : str
        Spec file name for the message.
    """
    _walk(root, file_name, (), ())


def _walk(node, file_name: str, written: tuple, path: tuple) -> None:
    if isinstance(node, yaml.SequenceNode):
        for index, item in enumerate(node.value):
            _walk(item, file_name, written + (index,), path + ("*",))
        return
    if not isinstance(node, yaml.MappingNode):
        return
    for key, value in node.value:
        here = path + (key.value,)
        line = key.start_mark.line + 1
        new = RENAMED_KEYS.get(here)
        if new is not None:
            raise UserError(
                f"{file_name}:{line} {_dotted(written + (key.value,))}: renamed; write '{new}' instead of '{key.value}'"
            )
        renamed = RENAMED_VALUES.get(here, {})
        if isinstance(value, yaml.ScalarNode) and value.value in renamed:
            raise UserError(
                f"{file_name}:{value.start_mark.line + 1} {_dotted(written + (key.value,))}: "
                f"'{value.value}' is now written '{renamed[value.value]}'"
            )
        _walk(value, file_name, written + (key.value,), here)


def _dotted(loc: tuple) -> str:
    return "".join(f"[{p}]" if isinstance(p, int) else ("." if i else "") + str(p) for i, p in enumerate(loc))
