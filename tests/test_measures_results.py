"""Ranked rows with ties, the shape of results, and the docstring examples of every measure module."""

from __future__ import annotations

import doctest
import importlib
import math

import pytest

import networkx as nx

from app.network.measures.conventions import induced, working_graph
from app.network.measures.results import MeasureError, MeasureResult, rank_rows

MODULES = ["results", "conventions", "kernels", "centrality", "summary", "components", "cuts", "cliques", "communities"]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples_run(name):
    module = importlib.import_module(f"app.network.measures.{name}")
    failures, tried = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert failures == 0
    assert tried > 0


def test_competition_ranks_with_ties():
    rows = rank_rows({"a": 0.5, "b": 0.9, "c": 0.5, "d": 0.1, "e": 0.9})
    assert [(row.node, row.rank) for row in rows] == [("b", 1), ("e", 1), ("a", 3), ("c", 3), ("d", 5)]


def test_values_within_the_tolerance_tie_and_the_rule_never_chains():
    t = 1e-6
    rows = rank_rows({"x": 1.0, "y": 1.0 + 0.6e-6, "z": 1.0 + 1.2e-6}, tolerance=t)
    assert {row.node: row.rank for row in rows} == {"z": 1, "y": 1, "x": 2}
    # y is within t of both, but z is clearly above x: x has one value above it (ties do not chain)
    assert rank_rows({"x": 1.0, "y": 1.0 + 2e-9}, tolerance=1e-9)[1].rank == 2
    assert rank_rows({"x": 1.0, "y": 1.0 + 0.5e-9}, tolerance=1e-9)[1].rank == 1
    # residues of floating point sums tie with 0
    assert {row.rank for row in rank_rows({"p": 0.0, "q": 1e-17, "r": 5.551115123125783e-17})} == {1}


def test_undefined_values_come_last_without_a_rank():
    rows = rank_rows({"a": None, "b": 2.0, "c": math.nan, "d": 2.0})
    assert [(row.node, row.value, row.rank) for row in rows] == [("b", 2.0, 1), ("d", 2.0, 1), ("a", None, None), ("c", None, None)]
    with pytest.raises(MeasureError):
        rank_rows({"a": 1.0}, tolerance=1.5)


def test_rows_are_ordered_by_id_within_a_rank_and_carry_raw_and_reasons():
    result = MeasureResult(
        measure="closeness", values={10: 0.5, 2: 0.5, 7: 0.0}, raw={10: 1.0, 2: 1.0, 7: 0.0}, conventions="...",
        reasons={7: "no path to any other person: 0"},
    )
    rows = result.rows()
    assert [(row.node, row.rank, row.raw, row.reason) for row in rows] == [
        (2, 1, 1.0, None), (10, 1, 1.0, None), (7, 3, 0.0, "no path to any other person: 0"),
    ]


def test_working_graphs_keep_one_order_whatever_the_insertion_order():
    # Seeded searches (sampled sources, communities) depend on node and edge order.
    G = nx.Graph([("kay", "ann"), ("bo", "kay"), ("ann", "bo")])
    G.add_nodes_from(["zed", "cy", "dee", "eve", "fay", "gus"])
    H = working_graph(G, sort_edges=True)
    assert list(H) == ["ann", "bo", "cy", "dee", "eve", "fay", "gus", "kay", "zed"]
    assert list(H.edges()) == [("ann", "bo"), ("ann", "kay"), ("bo", "kay")]
    assert list(induced(H, {"kay", "bo", "ann"})) == ["ann", "bo", "kay"]  # H's order, not a set's
    assert list(induced(H, {"kay", "bo", "ann"}).edges()) == list(H.edges())
