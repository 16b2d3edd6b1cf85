"""Measured-points tables (evtkin's own CSV and JSON format): reading, errors naming the line."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from evtkin.errors import ResultsError
from evtkin.output.measured import read_measured

GOOD = """# evtkin measured table
# label: toy points
# toy: true
# x_unit: GeV
# y_unit: events
lo,hi,value,stat,syst
60,70,100,10,5
70,80,400,20,12
80,90,90,9.5,4
"""


def test_csv_and_json_read_the_same_table(tmp_path: Path) -> None:
    c = tmp_path / "m.csv"
    c.write_text(GOOD, encoding="utf-8")
    j = tmp_path / "m.json"
    j.write_text(json.dumps({
        "format": "evtkin-measured", "label": "toy points", "toy": True, "x_unit": "GeV",
        "y_unit": "events", "columns": ["lo", "hi", "value", "stat", "syst"],
        "bins": [[60, 70, 100, 10, 5], [70, 80, 400, 20, 12], [80, 90, 90, 9.5, 4]]}, indent=1))
    for t in (read_measured(c), read_measured(j)):
        np.testing.assert_array_equal(t.edges, [60, 70, 80, 90])
        np.testing.assert_array_equal(t.values, [100, 400, 90])
        # stat and syst add in quadrature (independent errors; common practice)
        np.testing.assert_allclose(t.total_error, np.hypot([10, 20, 9.5], [5, 12, 4]))
        assert t.label == "toy points"
        assert t.toy
        assert t.y_unit == "events"


def test_wrong_column_count_names_file_and_line(tmp_path: Path) -> None:
    p = tmp_path / "bad.csv"
    p.write_text(GOOD.replace("70,80,400,20,12", "70,80,400,20"), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"bad\.csv:8: expected 5 columns .* got 4"):
        read_measured(p)


def test_non_numeric_value_names_file_line_and_column(tmp_path: Path) -> None:
    p = tmp_path / "bad.csv"
    p.write_text(GOOD.replace("80,90,90,9.5,4", "80,90,ninety,9.5,4"), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"bad\.csv:9: column 'value': expected a number, "
                                           r"got 'ninety'"):
        read_measured(p)


def test_json_errors_name_the_line_of_the_row(tmp_path: Path) -> None:
    rows = [[60, 70, 100, 10, 5], [70, 80, "x", 20, 12], [80, 90, 90, 9.5]]
    text = ('{"format": "evtkin-measured", "y_unit": "events",\n "bins": [\n'
            + ",\n".join("  " + json.dumps(r) for r in rows) + "\n ]\n}\n")
    p = tmp_path / "bad.json"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(ResultsError, match=r"bad\.json:4: column 'value': expected a number"):
        read_measured(p)
    rows[1][2] = 400
    p.write_text(text.replace('"x"', "400"), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"bad\.json:5: expected 5 columns"):
        read_measured(p)


def test_other_mistakes(tmp_path: Path) -> None:
    p = tmp_path / "m.csv"
    p.write_text(GOOD.replace("lo,hi,value,stat,syst", "lo,hi,val,stat,syst"), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"m\.csv:6: expected the header row"):
        read_measured(p)
    p.write_text(GOOD.replace("80,90,90", "85,90,90"), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"m\.csv:9: bins must follow each other"):
        read_measured(p)
    p.write_text(GOOD.replace("60,70,100,10,5", "60,70,100,-10,5"), encoding="utf-8")
    with pytest.raises(ResultsError, match=r"m\.csv:7: errors must be >= 0"):
        read_measured(p)
    with pytest.raises(ResultsError, match="cannot read"):
        read_measured(tmp_path / "missing.csv")
