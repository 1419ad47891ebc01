"""The options offered to users are the engine's own lists (a new estimator appears everywhere)."""

from __future__ import annotations

import ast
from pathlib import Path

from exposhift.synthesis.choices import ESTIMATORS, INTERVALS, WITHIN_EVENT_ROUTES
from exposhift.synthesis.event_pooling import WITHIN_EVENT
from exposhift.synthesis.pooling import CI_METHODS, METHODS

PAGE = Path(__file__).resolve().parents[2] / "app" / "views" / "pooling.py"


def test_choices_are_the_engine_lists():
    assert set(ESTIMATORS) == set(METHODS)
    assert set(INTERVALS) == set(CI_METHODS)
    assert WITHIN_EVENT_ROUTES == WITHIN_EVENT


def test_the_pooling_page_declares_no_option_list_of_its_own():
    """No dict, list, tuple or set on the page names two or more of the library's options (a
    list of table columns may name one stratum column, such as ``country``)."""
    tree = ast.parse(PAGE.read_text(encoding="utf-8"))
    offered = set(METHODS) | set(CI_METHODS) | set(WITHIN_EVENT) | {"design-family", "country"}
    lists = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Dict | ast.List | ast.Tuple | ast.Set):
            elts = node.keys if isinstance(node, ast.Dict) else node.elts
            names = {
                c.value for c in elts if isinstance(c, ast.Constant) and isinstance(c.value, str)
            }
            if len(names & offered) >= 2:
                lists.append(names & offered)
    assert not lists, lists
