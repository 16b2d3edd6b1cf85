"""Hostile expressions (issue 18 §5): size and depth limits, constants computed at load,
conditions that are no conditions; each a ConfigError naming the key and its line."""

from __future__ import annotations

import math
import re

import pytest

from evtkin.expr import MAX_DEPTH, ExpressionError, evaluate, parse
from test_config import BASE, error_for, line_of

MASS_LINE = 'require = "60 < mll < 120"'


def with_step(expr: str) -> str:
    return BASE.replace(MASS_LINE, f"require = {expr!r}".replace("'", '"'))


@pytest.mark.parametrize(
    ("expr", "message"),
    [
        ("(" * 100 + "mll" + ")" * 100 + " > 1", "nested too deeply"),
        (" + ".join(["mll"] * 500) + " > 1", "too deep"),
        ("not " * 1000 + "mll > 1", "nested too deeply"),
        ("leptons[" + "1" * 5000 + "].pt > 1", "index too large"),
        ("mll > 1/0", "division by zero"),
        ("mll > 10**10**10", "too large"),
        ("mll > 0**-1", "0 to a negative power"),
        ("mll > sqrt(-1)", "math domain error"),
        ("mll > exp(1000)", "too large"),
    ],
)
def test_bad_expression_is_a_config_error_with_line_and_column(tmp_path, expr, message):
    text = with_step(expr)
    msg = error_for(tmp_path, text)
    line = line_of(text, expr[:20])
    assert f"analysis.toml:{line}: step[1].require: bad expression: " in msg
    assert message in msg
    assert re.search(r"\(column \d+\)", msg)


@pytest.mark.parametrize(
    ("expr", "what"),
    [
        ("1 < 2", "a constant"),
        ("3", "a constant"),
        ("mll", "not a condition"),
        ("leptons[0]", "not a condition"),
        ("mll * 2", "not a condition"),
    ],
)
def test_require_must_be_a_condition(tmp_path, expr, what):
    text = with_step(expr)
    msg = error_for(tmp_path, text)
    line = line_of(text, f'require = "{expr}"')
    assert f"analysis.toml:{line}: step[1].require" in msg
    assert "require must be true/false" in msg
    assert what in msg


def test_a_long_expression_text(tmp_path):
    with pytest.raises(ExpressionError, match="too long"):
        parse("x" * 20_000)
    with pytest.raises(ExpressionError, match="too long"):
        parse(" + ".join(["x"] * 3000))


def test_constants_are_computed_once_and_exactly():
    # 2*pi is folded into one number; the value is Python's float arithmetic
    e = parse("x * (2 * pi) + 10**2")
    assert e.tree.args[1].kind == "num"
    assert e.tree.args[1].value == 100.0
    assert e.tree.args[0].args[1].value == 2 * math.pi
    assert evaluate(e, {"x": 1.0}) == 2 * math.pi + 100.0


def test_deep_but_allowed_expression_still_evaluates():
    n = MAX_DEPTH - 5
    assert evaluate(" + ".join(["x"] * n), {"x": 1.0}) == n
