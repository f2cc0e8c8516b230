"""Draw the README's figures: one of each kind, from the demo scenario, into docs/figures/*.png.

    python tests/update_readme_figures.py [--dpi 100]

The pole figure, step figure and top view are those of ``termination match
--demo --plot DIR`` (TiNiSn cleaved from a (0 0 1) mount).  The topograph and
Fourier pattern of the best candidate are drawn against a height map
*invented for illustration* (``termination.testing.synthetic_heightmap``: the
demo's square 4.19 Å lattice turned by 12°, steps of 1.48 and 2.97 Å, noise),
to show how a measured terrace and its spectrum appear beside the
prediction.  The demo crystal has no formal charges, so the polarity figure
is the textbook polar case instead: rock salt (1 1 1), Na-terminated
(``termination polarity rocksalt:Na,Cl --plane 1 1 1 --plot DIR``).  Run it
after changing a figure; it overwrites the PNGs (they are committed).
"""

from __future__ import annotations

import argparse
from pathlib import Path

from termination.figures.commands import Measured, match_figures, polarity_figures, write_figures
from termination.figures.topograph import MeasuredMap
from termination.identification.likelihood import match
from termination.identification.measurement import read_measurement
from termination.reports import polarity_report
from termination.structures import build_prototype, bundled
from termination.testing import synthetic_heightmap

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "docs" / "figures"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--dpi", type=float, default=100.0)
    args = parser.parse_args()
    OUT.mkdir(parents=True, exist_ok=True)

    crystal = build_prototype("half-heusler:Ti,Ni,Sn")
    report = match(crystal, read_measurement(bundled("demo_TiNiSn_001.toml")), top=10)
    plain = {p.name: p for p in match_figures(report, crystal)}
    heights = synthetic_heightmap(
        (256, 256), 0.25, tilt_deg=1.5, step_heights=[1.48, 2.97], lattice=(4.19, 4.19, 90.0, 12.0), seed=7
    )
    invented = Measured(MeasuredMap(heights, (0.25, 0.25), name="invented map"), direction=12.0)
    with_map = {p.name: p for p in match_figures(report, crystal, measured=invented)}
    salt = polarity_report(build_prototype("rocksalt:Na,Cl", a=5.64), plane=(1, 1, 1), max_cell=2)
    stack = next(p for p in polarity_figures(salt) if p.name == "polarity_111_T2")

    chosen = {
        "poles": plain["poles"],
        "steps": plain["steps"],
        "topview": plain["topview_best"],
        "topograph": with_map["topograph_best"],
        "fourier": with_map["fourier_best"],
        "polarity": stack,
    }
    from dataclasses import replace

    plans = [replace(plan, name=name) for name, plan in chosen.items()]
    for path in write_figures(plans, OUT, "png", force=True, dpi=args.dpi):
        print(path.relative_to(ROOT), f"{path.stat().st_size / 1024:.0f} KiB")


if __name__ == "__main__":
    main()
