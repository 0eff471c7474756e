"""Validation figures of ``curved_strip`` for its ``theory.md`` (regenerate after model changes).

Writes three PNGs into ``sweepshell/models/curved_strip/figures/``:

1. ``moment_curvature.png`` — m = M w/(D h) against k = κw²/h for c = w²/(R_t h) = 30, 100, 400,
   both senses, with the limit points and the Maxwell fold moments marked;
2. ``fold_vs_tape_spring.png`` — fold moment over (1 ± ν) D w/R_t and fold radius over R_t,
   minus one, against c, with the edge-layer fraction 2ℓ/w ∝ c^(−1/2);
3. ``sections.png`` — the section unloaded, at the peak and in the fold (c = 400, opposite sense),
   and the convergence of the fold moment with the number of modes.

    python benchmarks/figures_curved_strip.py
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt
import numpy as np

from sweepshell.models.curved_strip import CurvedStripModel

OUT = Path(__file__).resolve().parents[1] / "sweepshell" / "models" / "curved_strip" / "figures"
W, R, E, NU = 0.04, 0.04, 1.0e9, 0.3


def inputs(c, load, nu=NU):
    c = np.atleast_1d(np.asarray(c, dtype=float))
    n = c.size
    out = {p.name: np.full(n, p.default, dtype=object if p.choices else float) for p in CurvedStripModel.parameters}
    out.update(width=np.full(n, W), transverse_radius=np.full(n, R), thickness=W**2 / (R * c),
               youngs_modulus=np.full(n, E), poisson_ratio=np.full(n, nu), load=np.array([load] * n))
    return out


def units(inp):
    h, nu = inp["thickness"], inp["poisson_ratio"]
    d = E * h**3 / (12 * (1 - nu**2))
    return d * h / W, h / W**2


def figure_paths(model):
    fig, axes = plt.subplots(1, 3, figsize=(11.5, 4.2), constrained_layout=True)
    for ax, c in zip(axes, (30.0, 100.0, 400.0), strict=True):
        for load, color in (("bend_opposite", "#0072B2"), ("bend_equal", "#D55E00")):
            inp = inputs(c, load)
            res = model.solve_batch(inp)
            mu, ku = units(inp)
            path = res.outputs["moment_path"][0]
            sign = 1 if load == "bend_opposite" else -1
            ax.plot(sign * path[:, 1] / ku[0], sign * path[:, 0] / mu[0], color=color, lw=1.6,
                    label=load.replace("_", " "))
            ax.plot(sign * res.outputs["peak_curvature"][0] / ku[0], sign * res.outputs["peak_moment"][0] / mu[0],
                    "o", color=color, ms=5)
            fold = sign * res.outputs["fold_moment"][0] / mu[0]
            ax.axhline(fold, color=color, ls="--", lw=0.9)
        ax.set_xlabel("longitudinal curvature  k = κ w²/h")
        ax.set_ylabel("moment  m = M w/(D h)  (magnitude)")
        ax.set_title(f"c = w²/(R_t h) = {c:g}, ν = {NU}", fontsize=10)
        ax.grid(True, color="#E5E5E5", lw=0.6)
    axes[0].legend(fontsize=8.5, loc="upper right")
    fig.suptitle("curved_strip: moment–curvature paths (dots: limit points; dashed: steady fold moments)",
                 fontsize=11)
    fig.savefig(OUT / "moment_curvature.png", dpi=110)
    plt.close(fig)


def figure_fold(model):
    cs = np.geomspace(100, 20000, 12)
    fig, axes = plt.subplots(1, 2, figsize=(10.5, 4.2), constrained_layout=True)
    for load, color, published in (("bend_opposite", "#0072B2", 1 + NU), ("bend_equal", "#D55E00", -(1 - NU))):
        inp = inputs(cs, load)
        res = model.solve_batch(inp)
        mu, _ = units(inp)
        d_w_r = mu * cs  # D w / R_t in units: (D h/w)·c
        axes[0].loglog(cs, np.abs(res.outputs["fold_moment"] / (published * d_w_r) - 1), "o-", color=color, ms=4,
                       label=f"{load.replace('_', ' ')}: |M_fold/({published:+.1f} D w/R_t) − 1|")
        axes[1].loglog(cs, res.outputs["fold_radius"] / R - 1, "o-", color=color, ms=4,
                       label=f"{load.replace('_', ' ')}: R_fold/R_t − 1")
    edge = 2 * (12 * (1 - NU**2)) ** -0.25 / np.sqrt(cs)
    for ax in axes:
        ax.loglog(cs, edge, "k--", lw=1, label="edge-layer fraction 2ℓ/w ∝ c^(−1/2)")
        ax.set_xlabel("curvature parameter  c = w²/(R_t h)")
        ax.grid(True, which="both", color="#E5E5E5", lw=0.6)
        ax.legend(fontsize=8.5)
    axes[0].set_ylabel("relative difference to Seffen & Pellegrino (1999)")
    axes[1].set_ylabel("relative difference of the fold radius to R_t")
    fig.suptitle(f"curved_strip: fully formed fold against the tape-spring values (ν = {NU}, w/R_t = {W / R:g})",
                 fontsize=11)
    fig.savefig(OUT / "fold_vs_tape_spring.png", dpi=110)
    plt.close(fig)


def figure_sections(model):
    c = 400.0
    inp = inputs(c, "bend_opposite")
    res = model.solve_batch(inp)
    shape = res.outputs["section_shape"][0] * 1e3
    fig, axes = plt.subplots(1, 2, figsize=(10.5, 4.0), constrained_layout=True)
    for stage, (label, color) in enumerate((("unloaded", "#009E73"), ("at the peak moment", "#0072B2"),
                                            ("in the fold", "#D55E00"))):
        axes[0].plot(shape[stage, 0], shape[stage, 1], "o-", ms=2.5, color=color, label=label)
    axes[0].set_xlabel("transverse coordinate y  [mm]")
    axes[0].set_ylabel("height z over the crown  [mm]  (scale ×4 of y)")
    axes[0].set_aspect(4.0)
    axes[0].set_ylim(-0.5, 7.0)
    axes[0].legend(fontsize=8.5, loc="upper center", ncol=3, frameon=False)
    axes[0].grid(True, color="#E5E5E5", lw=0.6)
    axes[0].set_title(f"sections, w = {W * 1e3:g} mm, R_t = {R * 1e3:g} mm, c = {c:g}, opposite sense", fontsize=10)
    c_conv = 1e4
    inp = inputs(c_conv, "bend_opposite")
    ref = CurvedStripModel(modes=64).solve_batch(inp).outputs["fold_moment"][0]
    modes = np.array([4, 6, 8, 10, 12, 14, 16, 20, 24])
    err = [abs(CurvedStripModel(modes=int(m), tolerance=1.0, layer_resolution=0.0).solve_batch(inp)
               .outputs["fold_moment"][0] / ref - 1) for m in modes]
    axes[1].semilogy(modes, np.maximum(err, 1e-16), "o-", color="#0072B2")
    axes[1].axvline(24, color="#777777", ls=":", lw=1)
    axes[1].text(23.6, 1e-3, "default 24", ha="right", fontsize=8.5, color="#555555")
    axes[1].set_xlabel("modes (even Legendre polynomials across the width)")
    axes[1].set_ylabel("relative error of the fold moment (vs 64 modes)")
    axes[1].set_title(f"convergence, c = {c_conv:g}, ν = {NU}", fontsize=10)
    axes[1].grid(True, which="both", color="#E5E5E5", lw=0.6)
    fig.savefig(OUT / "sections.png", dpi=110)
    plt.close(fig)


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    model = CurvedStripModel()
    figure_paths(model)
    figure_fold(model)
    figure_sections(model)
    print(f"wrote {sorted(p.name for p in OUT.glob('*.png'))} to {OUT}")


if __name__ == "__main__":
    main()
