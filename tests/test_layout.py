"""Networks without geometry (CSV edge lists): the path-length layout, and planning them end to end."""
from __future__ import annotations

import random

import networkx as nx
import numpy as np
from scipy.stats import spearmanr

from crewcut.cli.main import main
from crewcut.solve.network.layout import path_layout


def _random_street_graph(seed: int) -> nx.Graph:
    # A perturbed grid with random lengths and a few missing streets (test data, not a town).
    rng = random.Random(seed)
    g = nx.grid_2d_graph(7, 6)
    for e in list(g.edges):
        if rng.random() < 0.1 and g.degree(e[0]) > 2 and g.degree(e[1]) > 2:
            g.remove_edge(*e)
    g = g.subgraph(max(nx.connected_components(g), key=len)).copy()
    for a, b in g.edges:
        g[a][b]["length"] = rng.uniform(60.0, 180.0)
    return nx.convert_node_labels_to_integers(g, ordering="sorted")


def test_layout_distances_follow_street_distances():
    # Reference: networkx's Dijkstra path lengths. The layout is for grouping only, so
    # we ask that it keeps the order of distances (Spearman rank correlation), not the values.
    for seed in range(5):
        g = _random_street_graph(seed)
        u, v = np.array(list(g.edges)).T
        w = np.array([g[a][b]["length"] for a, b in g.edges])
        x, y = path_layout(g.number_of_nodes(), u, v, w)
        d = dict(nx.all_pairs_dijkstra_path_length(g, weight="length"))
        pairs = [(a, b) for a in g for b in g if a < b]
        street = [d[a][b] for a, b in pairs]
        plane = [np.hypot(x[a] - x[b], y[a] - y[b]) for a, b in pairs]
        assert spearmanr(street, plane).statistic > 0.85
        x2, y2 = path_layout(g.number_of_nodes(), u, v, w)
        assert np.array_equal(x, x2) and np.array_equal(y, y2)  # deterministic


def test_layout_places_separate_pieces_apart():
    u = np.array([0, 1, 3, 4])
    v = np.array([1, 2, 4, 5])
    x, y = path_layout(6, u, v, np.full(4, 100.0))
    assert np.isfinite(x).all() and np.isfinite(y).all()
    assert min(x[3:]) > max(x[:3])


def test_csv_network_plans_and_verifies(tmp_path, capsys):
    g = _random_street_graph(3)
    rows = ["from,to,length_m,name"] + [f"n{a},n{b},{g[a][b]['length']:.2f},Street {i}"
                                       for i, (a, b) in enumerate(sorted(g.edges))]
    net = tmp_path / "edges.csv"
    net.write_text("\n".join(rows) + "\n")
    cfg = tmp_path / "crews.toml"
    cfg.write_text('[[crews]]\nid = "a"\ndepot_node = 0\n\n[[crews]]\nid = "b"\ndepot_node = 5\n')
    assert main(["plan", str(net), "--config", str(cfg), "--out", str(tmp_path / "p"), "--workers", "1"]) == 0
    assert main(["verify", str(tmp_path / "p" / "plan.json"), str(net), "--config", str(cfg)]) == 0
    capsys.readouterr()
    # maps need coordinates: a clear message, exit 2, nothing written
    assert main(["map", str(tmp_path / "p" / "plan.json"), "--out", str(tmp_path / "m.svg")]) == 2
    assert "no coordinates" in capsys.readouterr().err
    assert not (tmp_path / "m.svg").exists()
