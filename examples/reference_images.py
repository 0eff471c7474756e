"""Draw the reference images of the demo maps shown in the README (docs/images/*.png).

Runs the four demo sweeps of ``configs/sweep/`` into a scratch folder (a few minutes on two
cores; stores already there are resumed, so a second call only draws) and draws one figure
of each with the command line, as a user would:

    python examples/reference_images.py [--scratch DIR] [--workers N]

Images are written at 90 dpi so that each stays under 100 kB.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from sweepshell.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "docs" / "images"

#: (sweep name, image name, arguments of `sweepshell map` or `sweepshell path` after the store)
FIGURES = [
    ("dome_dimple_map", "dome_dimple_map.png", ["map", "--x", "shell_parameter", "--y", "dimple_amplitude",
                                                "--contour", "knockdown"]),
    ("coated_patch_wrinkle_map", "coated_patch_wrinkle_map.png", ["map", "--x", "strain_x", "--y", "strain_y"]),
    ("strip_wrinkle_fold_map", "strip_wrinkle_fold_map.png", ["map", "--x", "cubic_stiffness", "--y",
                                                              "confinement", "--contour", "fold_amplitude"]),
    ("plate_flexure_trench", "plate_flexure_trench.png", ["map", "--x", "elastic_thickness", "--y",
                                                          "forebulge_distance"]),
    ("dome_dimple_map", "dome_load_paths.png", ["path", "--at", "shell_parameter=6.5,dimple_amplitude=0.01",
                                                "--at", "shell_parameter=9,dimple_amplitude=0.01"]),
]


def run(scratch: Path, workers: int) -> int:
    """Run the demo sweeps into ``scratch`` and draw every reference image; return an exit code."""
    import matplotlib

    matplotlib.rcParams["savefig.dpi"] = 90
    from sweepshell.plot import style

    original = style.save_figure

    def small(fig, path):  # the README shows them small; 90 dpi keeps each file under 100 kB
        fig.savefig(path, dpi=90, metadata={"Description": getattr(fig, "_sweepshell_caution", "")})

    style.save_figure = small
    try:
        OUT.mkdir(parents=True, exist_ok=True)
        for sweep in dict.fromkeys(name for name, _, _ in FIGURES):
            code = main(["run", sweep, f"store.path={scratch / (sweep + '.zarr')}", "--progress", "none",
                         "executor=local", f"executor.workers={workers}", "--config-dir", str(ROOT / "configs")])
            if code:
                return code
        for sweep, image, args in FIGURES:
            command, *rest = args
            code = main([command, str(scratch / (sweep + ".zarr")), *rest, "--out", str(OUT / image)])
            if code:
                return code
    finally:
        style.save_figure = original
    for image in sorted(OUT.glob("*.png")):
        print(f"{image.relative_to(ROOT)}: {image.stat().st_size / 1000:.0f} kB")
    return 0


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scratch", type=Path, default=ROOT / "results" / "reference", help="stores go here")
    parser.add_argument("--workers", type=int, default=2, help="local worker processes")
    args = parser.parse_args()
    sys.exit(run(args.scratch, args.workers))
