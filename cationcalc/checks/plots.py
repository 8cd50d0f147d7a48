"""The plot of one evaluated reference set (PNG): parity for an absolute set, experiment vs computed otherwise.

Drawn here, beside the checks, so that the checks need nothing from the study report.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

def plot_set(result: dict, path: str | Path) -> Path:
    """Parity plot (absolute set: raw and LOO-calibrated) or correlation plot (experiment vs computed), PNG."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    used = [e for e in result["entries"] if e.get("calc") is not None and not e.get("excluded_reason")]
    fig, ax = plt.subplots(figsize=(6.4, 5.2), dpi=110)
    if result["kind"] == "absolute":
        exp = np.array([e["exp"] for e in used])
        calc = np.array([e["calc"] for e in used])
        ax.scatter(exp, calc, label=f"raw (MAE {result['raw']['mae']:.1f})", color="tab:red")
        if result.get("loo"):
            cal = np.array([e["loo_calibrated"] for e in used])
            ax.scatter(exp, cal, marker="s", label=f"calibrated, LOO (MAE {result['loo']['mae']:.1f})",
                       color="tab:blue")
        lo, hi = min(exp.min(), calc.min()) - 5, max(exp.max(), calc.max()) + 5
        ax.plot([lo, hi], [lo, hi], color="grey", lw=1, label="y = x")
        ax.set_xlabel("HIA experiment / kcal mol⁻¹")
        ax.set_ylabel("HIA computed / kcal mol⁻¹")
        for e in used:
            ax.annotate(e["name"].split(" (")[0], (e["exp"], e["calc"]), fontsize=6, xytext=(3, 2),
                        textcoords="offset points")
    else:
        exp = np.array([e["exp"] for e in used])
        calc = np.array([e["calc"] for e in used])
        ax.scatter(exp, calc, color="tab:blue")
        if result.get("slope") is not None:
            xs = np.linspace(exp.min(), exp.max(), 10)
            ax.plot(xs, result["slope"] * xs + result["intercept"], color="grey", lw=1,
                    label=f"slope {result['slope']:.2f}, r {result['r']:.3f}, ρ {result['spearman_rho']:.2f}")
            ax.legend(fontsize=8)
        for e in used:
            ax.annotate(e["name"], (e["exp"], e["calc"]), fontsize=6, xytext=(3, 2), textcoords="offset points")
        ax.set_xlabel(result["experiment"])
        ax.set_ylabel(result["computed"])
    if result["kind"] == "absolute":
        ax.legend(fontsize=8)
    ax.set_title(f"{result['title']}\n{result['level']}", fontsize=9)
    fig.tight_layout()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path)
    plt.close(fig)
    return path


__all__ = ["plot_set"]
