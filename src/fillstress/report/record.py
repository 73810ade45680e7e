"""The settlement calculation record of the report: the soil profile with every parameter
used, the water table and rigid base, drains, the load states, the sublayer table of each
borehole, t50/t90/t95 and secondary compression, the preload and drain design answers;
and the convergence limit item and the influence-depth note.

Everything comes from the CSV tables a run writes (docs/results-folder.md) through
:class:`fillstress.io.results.ResultsFolder`; texts pass through ``esc``.
"""
from __future__ import annotations

from .tables import esc, frame_table, plain

CONVERGENCE_LIMIT = 0.05      # relative change of Δσz on halving the cell that is flagged

_PARTS = (
    ("soil_profile", "Soil profile as used",
     "Every parameter of every layer as the calculation used it, in the units of its "
     "column head; depths below the existing ground. Settlement below the rigid base is zero."),
    ("drains", "Vertical drains",
     "Unit cell of each drain zone: de = 1.05 s (triangular) or 1.128 s (square), "
     "n = de/dw, Hansbo's (1981) μ with smear; Carrillo (1942) with vertical drainage."),
    ("load_states", "Load states",
     "Stages in time order with their start day and build duration (the load rises linearly "
     "over it, Olson 1977) and every removal; settlement fully consolidated under each state."),
    ("consolidation_times", "Consolidation times and secondary compression",
     "t50, t90, t95: days after the first stage starts until the settlement of the loading "
     "(without removals) reaches 50, 90, 95 % of its final value. Secondary compression "
     "Cα/(1+e_p)·H·log10(t/tp) over the design life, tp at U = 95 % unless stated."),
    ("preload", "Preload: earliest surcharge removal",
     "The day the settlement under permanent load plus surcharge reaches the final "
     "settlement under the permanent load alone (Holtz & Kovacs); removing the surcharge "
     "before it leaves primary settlement to come under the permanent load."),
    ("drain_design", "Drain spacing for the target",
     "The spacing that reaches the target average degree of consolidation by the target day "
     "(solved by root finding), with the vertical degree reached by then."),
)


def calculation_record(folder) -> str:
    """HTML of the record's tables present in the results folder ('' when none)."""
    parts = []
    for name, title, note in _PARTS:
        df = folder.table(name)
        if df is None or df.empty:
            continue
        parts.append(f"<h3>{esc(title)}</h3><p class=\"note\">{esc(note)}</p>"
                     + frame_table(df.dropna(axis=1, how="all"), folder.units))
    parts += _sublayer_tables(folder)
    return "".join(parts)


def _sublayer_tables(folder) -> list[str]:
    df = folder.table("settlement_sublayers")
    if df is None or df.empty:
        return []
    settle = folder.units.suffixed("settlement", "settlement")
    out = ["<h3>Sublayers of each borehole</h3><p class=\"note\">σ′v0, σ′p, Δσz after each "
           "load state (numbered as in the load states), final and largest past effective "
           "stress, strain, compression and the branch of the e–log σ′ path: loading beyond "
           "the largest past stress on Cc, unloading and reloading below it on Cr (or the "
           "unloading modulus). Each table sums to the borehole's settlement.</p>"]
    for rid, grp in df.groupby("receptor_id", sort=False):
        total = grp[settle].sum() if settle in grp else float("nan")
        out.append(f"<h4>{esc(rid)}: total {esc(plain(total))} {esc(folder.units.settlement)}"
                   "</h4>" + frame_table(grp.drop(columns="receptor_id"), folder.units))
    return out


def convergence_item(conv: dict, units) -> str | None:
    """A 'limit reached' line when halving the cell changed Δσz by more than 5 %, with the
    cell that would meet it if the change falls in proportion to the cell (first order)."""
    change = (conv or {}).get("max_relative_change")
    if change is None or not change > CONVERGENCE_LIMIT:
        return None
    cell = conv.get(f"cell_{units.length}", conv.get("cell_m"))
    need = "" if cell is None else (f"; a cell of about {plain(cell * CONVERGENCE_LIMIT / change)} "
                                    f"{units.length} would meet it (estimated, first order)")
    where = f" at {conv['at_point']}" if conv.get("at_point") else ""
    return (f"convergence: halving the cell changes Δσz by {change:.1%}{where}, more than "
            f"{CONVERGENCE_LIMIT:.0%}{need}")


INFLUENCE_NOTE = (
    "The influence depth is where Δσz falls to the stated fraction of σ′v0. It is blank in "
    "two cases: Δσz is still above that fraction at the deepest sample point (the zone of "
    "significant stress runs deeper than the profile), or Δσz is below it at every sample "
    "point (the load is never significant there, e.g. far from the fill).")
