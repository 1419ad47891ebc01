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
    tree = ast.parse(PAGE.read_text(encoding="utf-8"))
    literals = {
        c.value
        for node in ast.walk(tree)
        if isinstance(node, ast.Dict | ast.List | ast.Tuple | ast.Set)
        for c in (node.keys if isinstance(node, ast.Dict) else node.elts)
        if isinstance(c, ast.Constant) and isinstance(c.value, str)
    }
    offered = set(METHODS) | set(CI_METHODS) | set(WITHIN_EVENT) | {"design-family", "country"}
    assert not literals & offered, literals & offered
