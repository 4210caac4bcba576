"""`analysis:` in nodegate.yaml: the worst-case vertex bound reaches the analysis, bad values are located errors."""

from __future__ import annotations

import pytest

from checker.errors import ConfigError
from checker.findings import Analysis
from checker.pipeline import analysis_of
from checker.analysis.worstcase import DEFAULT_VERTEX_VALUES
from checker.repo.config import load_config


def _config(tmp_path, analysis: str):
    (tmp_path / "b.circuit").write_text('circuit b "Bench lamp"\nground gnd\n'
                                        "source V1 from a to gnd : 5 V\nresistor R1 from a to gnd : 1 kohm\n")
    path = tmp_path / "nodegate.yaml"
    path.write_text(f"circuits:\n  - b.circuit\nanalysis:\n{analysis}", encoding="utf-8")
    return load_config(path)


def test_worst_case_gets_the_configured_vertex_bound(tmp_path):
    config = _config(tmp_path, "  tolerances: worst-case\n  vertex_values: 12\n")
    assert analysis_of(config) == Analysis("worst-case", vertex_values=12)


def test_worst_case_vertex_bound_defaults_to_sixteen(tmp_path):
    assert DEFAULT_VERTEX_VALUES == 16
    assert analysis_of(_config(tmp_path, "  tolerances: worst-case\n")).vertex_values is None  # the default


@pytest.mark.parametrize("value", ["21", "-1", "2.5", "many", "true"])
def test_vertex_bound_outside_0_to_20_is_a_located_error(tmp_path, value):
    with pytest.raises(ConfigError) as caught:
        _config(tmp_path, f"  tolerances: worst-case\n  vertex_values: {value}\n")
    assert "`vertex_values` must be a whole number from 0 to 20" in caught.value.message
    assert caught.value.location.line == 5
