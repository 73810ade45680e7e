"""Write the guide's corridor pictures from a run of the corridor test site.

    python tools/write_corridor_images.py [--miles 3.0] [--keep FOLDER]

Generates the Fenmoor Parkway site (tools/make_corridor_site.py), runs it with the
defaults (as `fillstress run` does, report included) and draws the longitudinal profile
and the cross-section at the creek crossing with the report's own figure functions into
docs/images/corridor_profile.png and docs/images/corridor_section.png.
"""
from __future__ import annotations

import argparse
import importlib.util
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
IMAGES = ROOT / "docs" / "images"


def _generator():
    spec = importlib.util.spec_from_file_location("_make_corridor",
                                                  ROOT / "tools" / "make_corridor_site.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def main(argv=None) -> None:
    from fillstress.io.results import ResultsFolder
    from fillstress.report.corridor import profile_figure, section_figure
    from fillstress.run.compute import run_site_file

    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--miles", type=float, default=3.0)
    ap.add_argument("--keep", help="folder for the site and its results (default: temporary)")
    args = ap.parse_args(argv)
    work = Path(args.keep or tempfile.mkdtemp(prefix="corridor_"))
    site = _generator().write_corridor_site(work / "fenmoor", miles=args.miles)
    run_site_file(site, work / "results", overwrite=True)
    folder = ResultsFolder(work / "results")
    u = folder.units
    IMAGES.mkdir(parents=True, exist_ok=True)
    (IMAGES / "corridor_profile.png").write_bytes(
        profile_figure(folder.table("alignment_profile"), u))
    surface = folder.table("alignment_section_surface")
    panel = folder.table("alignment_section_dsz")
    key = u.suffixed("station", "length")
    stations = sorted(surface[key].unique())
    creek = stations[len(stations) // 2]          # the middle section: the creek crossing
    grp = surface[surface[key] == creek]
    (IMAGES / "corridor_section.png").write_bytes(section_figure(
        grp, panel[panel[key] == creek], u, str(grp["station_label"].iloc[0])))
    print(f"wrote {IMAGES / 'corridor_profile.png'} and {IMAGES / 'corridor_section.png'}"
          f" (site and results in {work})")


if __name__ == "__main__":
    main()
