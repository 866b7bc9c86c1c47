"""Every figure fvsolver draws (the only module that imports matplotlib)."""
from __future__ import annotations

import io
from pathlib import Path

import matplotlib

matplotlib.use("Agg")  # files only; never a window
import matplotlib.pyplot as plt  # noqa: E402
import matplotlib.ticker  # noqa: E402
import numpy as np  # noqa: E402

from fvsolver.outputs.files import atomic_write_bytes  # noqa: E402


def _save(fig, path: Path) -> None:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=130, bbox_inches="tight")
    plt.close(fig)
    atomic_write_bytes(Path(path), buf.getvalue())


def convergence_plot(reports, path: Path) -> None:
    """Log-log error against mesh size (or step) for every case and norm, with slope guides."""
    n = len(reports)
    cols = min(4, n)
    rows = int(np.ceil(n / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(3.6 * cols, 3.0 * rows), squeeze=False)
    for ax, rep in zip(axes.ravel(), reports):
        h = np.asarray(rep.h)
        for norm, errors in rep.errors.items():
            e = np.asarray(errors, dtype=float)
            if np.all(e > 0) and e.max() > 1e-11:  # round-off checks have no slope to show
                ax.loglog(h, e, marker="o", lw=1.2, label=norm)
        for slope, style in ((1, ":"), (2, "--")):
            ref = np.asarray(rep.errors[next(iter(rep.errors))], dtype=float)
            if np.all(ref > 0):
                ax.loglog(h, ref[-1] * (h / h[-1]) ** slope, "k" + style, lw=0.8, label=f"slope {slope}")
        ax.set_title(rep.case.replace("_", " "), fontsize=8)
        ax.set_xlabel("h (m) or step (s)", fontsize=7)
        ax.set_ylabel("relative error", fontsize=7)
        ax.tick_params(labelsize=6)
        ax.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.yaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
        ax.grid(True, which="both", lw=0.3, alpha=0.5)
        ax.legend(fontsize=5)
    for ax in axes.ravel()[n:]:
        ax.axis("off")
    fig.suptitle("fvsolver verification: observed convergence", fontsize=10)
    fig.tight_layout()
    _save(fig, path)
