"""The root-system object: notebook summary, DataFrame round trip, graph view, validation on construction."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest

import rootsim
from rootsim import RootSystem, SegmentTableError
from rootsim.spec import parse_spec

SPEC = {"run": {"duration_days": 6, "seed": 2}, "stand": {"rows": 1, "plants_per_row": 2},
        "emergence": [{"root_class": "axis", "roots_per_event": 2}],
        "root_classes": {"axis": {"elongation_rate_cm_per_day": 2.0, "interbranch_distance_cm": 1.0,
                                  "apical_zone_cm": 1.0, "branches": [{"root_class": "lateral"}]},
                         "lateral": {"elongation_rate_cm_per_day": 0.5, "max_length_cm": 2.0}}}


@pytest.fixture(scope="module")
def system():
    return rootsim.grow(parse_spec(SPEC), progress=False)


def test_notebook_summary_table_shows_the_headline_numbers(system):
    # The HTML table a notebook shows carries the counts a user would compute with pandas.
    html = system._repr_html_()
    df = system.to_dataframe()
    assert html.startswith("<table>") and "RootSystem" in html
    assert f"{len(df):,}" in html and f"{df.length_cm.sum():.1f} cm" in html
    assert f"{df.root_id.nunique():,}" in html


def test_dataframe_round_trip_and_parquet(system, tmp_path):
    df = system.to_dataframe()
    assert isinstance(df.root_class.dtype, pd.CategoricalDtype)
    back = RootSystem.from_dataframe(df)
    for name in ("parent_id", "x1", "length_cm", "birth_day"):
        assert np.array_equal(back[name], system[name])
    system.write(tmp_path / "s.parquet")
    read = RootSystem.read(tmp_path / "s.parquet")
    assert read.metadata["stand"]["n_plants"] == 2
    assert np.array_equal(np.asarray(read["root_class"], dtype=str), np.asarray(system["root_class"], dtype=str))


def test_graph_view_matches_the_arrays(system):
    # networkx (independent code): out-degree-0 nodes within a root are tips; edge kinds follow the arrays.
    g = system.to_networkx()
    assert isinstance(g, nx.DiGraph) and g.number_of_nodes() == len(system)
    assert nx.is_forest(g.to_undirected())
    branch_edges = [(u, v) for u, v, k in g.edges(data="kind") if k == "branch"]
    assert all(g.nodes[v]["order"] == g.nodes[u]["order"] + 1 for u, v in branch_edges)
    continued = {u for u, v, k in g.edges(data="kind") if k == "continuation"}
    assert len(system) - len(continued) == system.n_tips


def test_construction_validates_columns(system):
    cols = {name: system[name].copy() for name in system.columns}
    cols["radius_cm"][3] = -1.0
    with pytest.raises(SegmentTableError, match="radius_cm"):
        RootSystem(cols)
    cols = {name: system[name] for name in system.columns if name != "z1"}
    with pytest.raises(SegmentTableError, match="z1"):
        RootSystem(cols)
