"""The numbers a manuscript needs, as plain data (``atlas stats --format json|table``)."""

from __future__ import annotations

import math

import numpy as np

from .analysis.results import Results
from .model import Atlas


def _num(x, digits: int = 6):
    if x is None:
        return None
    x = float(x)
    return None if not math.isfinite(x) else round(x, digits)


def study_stats(atlas: Atlas, results: Results) -> dict:
    """Everything ``atlas stats`` reports, keyed as documented in the README."""
    sample = atlas.sample
    tree = results.tree
    par = results.parsimony
    summary = results.summary
    clades = []
    nodes = []
    for v in range(tree.n_nodes):
        if tree.tip[v] >= 0:
            continue
        members = list(results.members[v])
        entry = {"id": results.ids[v], "members": members,
                 "support": _num(summary.support[v])}
        if v != tree.root:
            clades.append(entry)
        states = {}
        for c in atlas.discrete:
            j = c.column
            if results.fit is not None:
                states[c.id] = {s: _num(results.probs[v, j, k]) for k, s in enumerate(c.symbols)}
        changes = results.changes
        gains = {c.id: _num(changes.gains[v, c.column]) for c in atlas.discrete} if changes else {}
        losses = {c.id: _num(changes.losses[v, c.column]) for c in atlas.discrete} if changes \
            else {}
        nodes.append({**entry, "trees": int(results.prob_trees[v]), "states": states,
                      "gains": gains, "losses": losses})
    by_character = []
    for c in atlas.discrete:
        j = c.column
        row = {"id": c.id, "steps": int(par.steps[j])}
        for key, attr in (("min", "min_steps"), ("max", "max_steps"), ("ci", "ci"), ("ri", "ri")):
            row[key] = _num(getattr(results.indices, attr)[j])
        by_character.append(row)
    fit = results.fit
    diag = results.diagnostics
    tip_node = {int(tree.tip[v]): v for v in range(tree.n_nodes) if tree.tip[v] >= 0}
    objects = []
    for obj in sorted(atlas.objects.values(), key=lambda o: o.id):
        if obj.withheld:
            continue
        delta = diag.delta_of(obj.taxon)
        v = tip_node[obj.taxon]
        objects.append({
            "id": obj.id,
            "delta": _num(delta[0]) if delta else None,
            "q_residual": _num(delta[1]) if delta else None,
            "changes_from_root": _num(diag.from_root[v]) if diag.from_root is not None else None,
        })
    discrete = atlas.discrete
    borrowing = [{
        # node ids (their members are under "nodes") or object ids: members are not repeated
        # here, since a large study has tens of thousands of candidates
        "a": results.ids[c.a], "b": results.ids[c.b],
        "characters": [discrete[j].id for j in c.characters], "score": _num(c.score),
        "distance_km": _num(c.distance, 1) if c.distance is not None else None,
    } for c in diag.borrowing if not _touches_withheld(atlas, results, c)]
    mantel = None if diag.mantel is None else {
        "r": _num(diag.mantel.r), "p": _num(diag.mantel.p),
        "permutations": diag.mantel.permutations, "n": diag.mantel.n}
    return {
        "trees": {"file": sample.file, "read": sample.read, "used": len(sample.trees),
                  "burnin": sample.burnin, "thin": sample.thin},
        "taxa": len(atlas.taxa),
        "characters": {"discrete": len(atlas.discrete),
                       "continuous": len(atlas.continuous_characters)},
        "summary": {"method": summary.method,
                    "outgroup": list(atlas.config.analysis["outgroup"]),
                    "clades": len(clades),
                    "mean_support": _num(np.mean([c["support"] for c in clades]))
                    if clades else None},
        "clades": clades,
        "parsimony": {"length": int(par.length),
                      "ci": _num(results.indices.ensemble_ci),
                      "ri": _num(results.indices.ensemble_ri),
                      "rc": _num(results.indices.ensemble_rc)},
        "by_character": by_character,
        "model": None if fit is None else {
            "name": fit.model, "rates": {k: _num(v) for k, v in sorted(fit.rates.items())},
            "alpha": _num(fit.alpha), "loglik": _num(fit.loglik),
            "variable_only": fit.variable_only},
        "nodes": nodes,
        "objects": objects,
        "borrowing": borrowing,
        "delta": None if diag.delta is None else {
            "mean": _num(diag.delta.mean_delta),
            "mean_q_residual": _num(diag.delta.mean_q_residual),
            "quartets": diag.delta.n_quartets, "sampled": diag.delta.sampled},
        "mantel": mantel,
    }


def _touches_withheld(atlas: Atlas, results: Results, candidate) -> bool:
    """A tip lineage of a withheld object is not published as a borrowing candidate."""
    for v in (candidate.a, candidate.b):
        if results.tree.tip[v] >= 0 and atlas.objects[results.ids[v]].withheld:
            return True
    return False


def stats_table(stats: dict) -> list[tuple[str, str]]:
    """The headline numbers as (label, value) rows for the terminal."""
    p = stats["parsimony"]
    rows = [
        ("Trees read / used / burn-in", f"{stats['trees']['read']} / {stats['trees']['used']} / "
                                        f"{stats['trees']['burnin']}"),
        ("Objects (taxa)", str(stats["taxa"])),
        ("Characters (discrete / continuous)", f"{stats['characters']['discrete']} / "
                                               f"{stats['characters']['continuous']}"),
        ("Summary tree", stats["summary"]["method"]),
        ("Clades in the summary tree", str(stats["summary"]["clades"])),
        ("Parsimony length", str(p["length"])),
    ]
    for key in ("ci", "ri", "rc"):
        if p[key] is not None:
            rows.append((f"Ensemble {key.upper()}", f"{p[key]:.3f}"))
    if stats["model"]:
        m = stats["model"]
        alpha = f", gamma alpha {m['alpha']:.3g}" if m["alpha"] else ""
        rows.append(("Model", m["name"] + alpha))
        rows.append(("Rates", ", ".join(f"{k} {v:.4g}" for k, v in m["rates"].items())))
        rows.append(("Log-likelihood", f"{m['loglik']:.2f}"))
    return rows
