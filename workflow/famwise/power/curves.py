"""The power-curve figure: every correction on one plot per effect level, n on the x axis, intervals as bands."""

from pathlib import Path

import numpy as np

from famwise.calibrate.settings import UNCORRECTED

_LINES = ("-", "--", "-.", ":")
_MARKERS = ("o", "s", "^", "D", "v", "P", "X")


def power_figure(rows: list[dict], *, contrast: str, target: float, folder: Path, stem: str) -> bytes:
    """Power against n, one panel per effect level; writes ``<stem>.png`` and ``.svg``, returns the PNG.

    Each correction is a line with markers at the simulated sizes and its
    Clopper-Pearson 95% interval as a band; the target power is a dashed
    line. The uncorrected reference is drawn thin and grey.
    """
    import matplotlib.pyplot as plt

    from famwise.figure_style import ACCENT, DIVERGING, MUTED, figure_style, save_figure

    effects = list(dict.fromkeys(r["effect"] for r in rows))
    corrections = [c for c in dict.fromkeys(r["correction"] for r in rows) if c != UNCORRECTED]
    shades = DIVERGING(_ends(len(corrections)))
    with figure_style():
        figure, axes = plt.subplots(
            1, len(effects), figsize=(3.4 * len(effects) + 1.6, 3.1), sharey=True, squeeze=False
        )
        for ax, effect in zip(axes[0], effects):
            for index, correction in enumerate([UNCORRECTED, *corrections]):
                mine = sorted(
                    (r for r in rows if r["effect"] == effect and r["correction"] == correction), key=lambda r: r["n"]
                )
                n = np.array([r["n"] for r in mine])
                power = np.array([r["power"] for r in mine])
                if correction == UNCORRECTED:
                    ax.plot(n, power, color=MUTED, linewidth=0.8, linestyle=":", label=UNCORRECTED)
                    continue
                colour = shades[index - 1] if len(corrections) > 1 else ACCENT
                ax.fill_between(
                    n,
                    [r["power_ci_low"] for r in mine],
                    [r["power_ci_high"] for r in mine],
                    color=colour,
                    alpha=0.18,
                    linewidth=0,
                )
                ax.plot(
                    n,
                    power,
                    color=colour,
                    linestyle=_LINES[(index - 1) % len(_LINES)],
                    marker=_MARKERS[(index - 1) % len(_MARKERS)],
                    markersize=3.5,
                    linewidth=1.2,
                    label=correction,
                )
            ax.axhline(target, color=ACCENT, linestyle="--", linewidth=0.7)
            ax.set_ylim(0, 1.02)
            ax.set_xlabel("participants (n)")
            ax.set_title(effect)
        axes[0][0].set_ylabel("power\n(share of simulated studies)")
        axes[0][-1].legend(loc="center left", bbox_to_anchor=(1.02, 0.5), frameon=False, fontsize=7.5)
        figure.suptitle(
            f"{contrast}: power of each correction (bands: 95% interval; dashes: target {target:g})",
            x=0.01,
            ha="left",
            fontsize=9,
        )
        return save_figure(figure, folder, stem)


def _ends(k: int) -> np.ndarray:
    """k positions on the diverging map away from its near-white centre (half from each end)."""
    cool, warm = -(-k // 2), k // 2
    return np.concatenate([np.linspace(0.0, 0.3, cool), np.linspace(0.7, 1.0, warm)])
