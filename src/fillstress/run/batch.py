"""Batch runs: one site over a list of variants, each with its own results folder, plus an
envelope (the largest value over the variants at every receptor point).

A variants file is TOML with one [[variants]] table per variant; its keys are declared in
``site.schema.VARIANTS`` and listed in docs/site-file.md.
"""
from __future__ import annotations

import copy
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from .._version import __version__
from ..errors import InputError
from ..io.atomic import ResultsWriter
from ..io.manifest import write_manifest
from ..io.tables import write_table_csv
from ..progress import silent
from ..site.build import load_site, scaled_body
from ..site.config import read_toml, reject_unknown, validate_group
from ..site.schema import VARIANTS
from ..soil import SoilProfile
from ..solve.distributed import connect, map_variants
from .compute import ASSUMPTIONS, CAUTIONS, RunSummary, cluster_choice, compute
from .plan import validate_run
from .files import column_quantities, write_all

@dataclass(frozen=True)
class Variant:
    """One variant of a site; None keeps the site's own value."""

    name: str
    unit_weight_factor: float = 1.0
    height_factor: float = 1.0
    water_table: float | None = None      # m (SI)
    method: str | None = None
    poisson: float | None = None


def read_variants(path, units) -> list[Variant]:
    """Read and validate a variants file (schema: ``site.schema.VARIANTS``, documented in
    docs/site-file.md); lengths are converted with the site's units."""
    path = Path(path)
    raw = read_toml(path, "variants file")
    reject_unknown(raw, ["variants"], path)
    if "variants" not in raw:
        raise InputError("needs one or more [[variants]] tables", file=path, key="variants")
    tables = validate_group(raw["variants"], VARIANTS, path, units)
    if not tables:
        raise InputError("needs one or more [[variants]] tables", file=path, key="variants")
    for i, t in enumerate(tables):
        if not t["name"].replace("_", "").replace("-", "").isalnum():
            raise InputError(f"needs a name of letters, digits, _ or -, got {t['name']!r}",
                             file=path, key=f"variants[{i}].name")
    names = [t["name"] for t in tables]
    if len(set(names)) != len(names):
        raise InputError("variant names must be unique", file=path, key="variants.name")
    return [Variant(**t) for t in tables]


def apply_variant(site, v: Variant):
    """A copy of `site` with the variant's changes."""
    out = copy.copy(site)
    out.body_factors = (site.body_factors[0] * v.unit_weight_factor,
                        site.body_factors[1] * v.height_factor)
    out.bodies = [scaled_body(b, v.unit_weight_factor, v.height_factor) for b in site.bodies]
    if v.method is not None:
        out.method = v.method
    if v.method == "boussinesq":
        out.poisson = None
    elif v.poisson is not None or out.method == "westergaard":
        out.poisson = v.poisson if v.poisson is not None else (site.poisson or 0.0)
    if v.water_table is not None:
        if site.soil is None:
            raise InputError("water_table needs a [soil] table in the site file",
                             argument=f"variant {v.name}")
        out.soil = SoilProfile(site.soil.layers, v.water_table, site.soil.rigid_base_m,
                               site.soil.gamma_w)
    return out


#: Envelope columns: each with the variant that gives its largest value.
ENVELOPE_COLUMNS = ("dsz", "settlement", "stress_ratio")


def envelope_points(frames: dict[str, pd.DataFrame]) -> pd.DataFrame:
    """Per receptor point the largest Δσz (and settlement, stress ratio) over the variants,
    each followed by the variant that gives it (``variant_of_max_<column>``: the first
    variant on a tie, empty where no variant has a value).

    Examples
    --------
    >>> point = {"receptor_kind": ["borehole"], "receptor_id": ["B1"], "point_id": ["B1-1"],
    ...          "role": ["borehole"], "x": [0.0], "y": [0.0], "depth": [2.0],
    ...          "chainage": [float("nan")]}
    >>> env = envelope_points({"heavy": pd.DataFrame({**point, "dsz": [60.0], "settlement": [0.02]}),
    ...                        "soft": pd.DataFrame({**point, "dsz": [50.0], "settlement": [0.05]})})
    >>> env[["dsz", "variant_of_max_dsz", "settlement", "variant_of_max_settlement"]].values.tolist()
    [[60.0, 'heavy', 0.05, 'soft']]
    """
    tagged = pd.concat([f.assign(variant=name) for name, f in frames.items()],
                       ignore_index=True)
    keys = ["receptor_kind", "receptor_id", "point_id"]
    groups = tagged.groupby(keys, sort=False)
    out = groups.first().reset_index()[keys + ["role", "x", "y", "depth", "chainage"]]
    for col in ENVELOPE_COLUMNS:
        if col not in tagged:
            continue
        out[col] = groups[col].max().to_numpy()
        ranked = tagged[col].fillna(-np.inf).groupby([tagged[k] for k in keys], sort=False)
        worst = tagged.loc[ranked.idxmax(), "variant"].to_numpy()
        out[f"variant_of_max_{col}"] = np.where(np.isnan(out[col].to_numpy(float)), "", worst)
    return out


def run_batch(site_path, variants_path, out, *, overwrite=False, report=False,
              progress=silent, workers=None, scheduler=None):
    r"""Run every variant of a site into ``out/<name>/`` and write the envelope.

    Parameters
    ----------
    site_path, variants_path : path-like
        The site file and the variants file (see the module docstring).
    out : path-like, optional
        Folder of the batch; default ``results-<site>-batch``. Refused if it exists
        unless `overwrite`.
    overwrite : bool
        Replace an existing batch folder.
    report : bool
        Write each variant's report and scene too (off by default: batches are big).
    progress : progress factory, optional
        As for :func:`fillstress.run.compute.run_site_file`.
    workers : int, optional
        Local Dask worker processes; whole variants run on the workers.
    scheduler : str, optional
        Address of a running Dask scheduler, instead of `workers`.

    Returns
    -------
    (list of RunSummary, pandas.DataFrame)
        One summary per variant, and the envelope table (SI) also written to
        ``envelope_points.csv``.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from fillstress.examples import example_site
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "v.toml").write_text('[[variants]]\nname = "a"\n'
    ...                               '[[variants]]\nname = "b"\nheight_factor = 2.0\n')
    >>> runs, env = run_batch(example_site("preload_surcharge"), d / "v.toml", d / "out")
    >>> sorted(p.name for p in (d / "out").iterdir())
    ['a', 'b', 'envelope_points.csv', 'manifest.json']
    >>> set(env["variant_of_max_dsz"])
    {'b'}
    """
    site = load_site(site_path)
    variants = read_variants(variants_path, site.units)
    out = Path(out) if out else Path(f"results-{Path(site_path).stem}-batch")
    folder = ResultsWriter(out, overwrite=overwrite,
                           protect=[*site.input_files, Path(variants_path)])
    sites = [apply_variant(site, v) for v in variants]
    notes = validate_run(site)
    cluster = cluster_choice(workers, scheduler, notes)
    if cluster:
        with connect(cluster) as client:                   # whole variants on the workers
            results = map_variants(compute, sites, client, progress=progress)
    else:
        results = [compute(s, progress) for s in sites]
    for res in results:
        res.warnings[:0] = notes
    with folder:
        for v, res in zip(variants, results):
            sub = _SubFolder(folder, v.name)
            write_all(res, sub, report=report, assumptions=ASSUMPTIONS, cautions=CAUTIONS,
                      version=__version__)
        env = envelope_points({v.name: r.points for v, r in zip(variants, results)})
        write_table_csv(folder.path("envelope_points.csv"), env, site.units,
                        {**column_quantities(env), **dict.fromkeys(
                            (f"variant_of_max_{c}" for c in ENVELOPE_COLUMNS), None)},
                        crs=site.crs)
        write_manifest(folder, settings={"variants": [vars(v) for v in variants]},
                       units=site.units, inputs=[*site.input_files, Path(variants_path)],
                       site_file=site.path, crs=site.crs, grid=site.spec,
                       assumptions=ASSUMPTIONS, cautions=CAUTIONS)
        if report:
            from ..report.batch import write_batch_report
            write_batch_report(folder.root)
    return [RunSummary(r, out / v.name) for v, r in zip(variants, results)], env


class _SubFolder:
    """The part of a results-folder transaction under one variant's name."""

    def __init__(self, folder, name: str):
        self.folder, self.name = folder, name
        self.root = folder.path(name)
        self.root.mkdir(parents=True, exist_ok=True)

    def path(self, rel: str) -> Path:
        return self.folder.path(f"{self.name}/{rel}")

    def __fspath__(self) -> str:
        return str(self.root)
