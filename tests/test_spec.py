"""Parameter-file validation: shipped files load; every kind of bad input is a one-line SpecError."""

from __future__ import annotations

import copy
import tomllib
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rootsim.cli import main
from rootsim.distributions import Normal, Uniform
from rootsim.errors import SpecError
from rootsim.spec import PARAMETER_RANGES, load_spec, parse_spec

PARAMS = Path(__file__).resolve().parents[1] / "params"
SHIPPED = sorted(PARAMS.glob("*.toml"))


def minimal():
    return {
        "run": {"duration_days": 5},
        "emergence": [{"root_class": "primary"}],
        "root_classes": {"primary": {"branches": [{"root_class": "lateral"}]}, "lateral": {}},
    }


def error_of(data) -> SpecError:
    with pytest.raises(SpecError) as info:
        parse_spec(data, source="trial.toml")
    return info.value


def test_at_least_three_shipped_architectures_validate():
    assert len(SHIPPED) >= 3
    for path in SHIPPED:
        spec = load_spec(path)
        assert spec.root_classes and spec.emergence
        text = path.read_text()
        assert "ILLUSTRATIVE" in text.upper()  # shipped values say they are illustrative


def test_unknown_key_names_path_and_suggests_nearest():
    data = minimal()
    data["root_classes"]["primary"]["radus_cm"] = 0.1
    err = error_of(data)
    assert err.key_path == "root_classes.primary.radus_cm"
    assert "radius_cm" in str(err) and "unknown key" in str(err)
    assert str(err).startswith("trial.toml: ")


def test_wrong_type_and_out_of_range():
    data = minimal()
    data["run"]["duration_days"] = "ten"
    assert error_of(data).key_path == "run.duration_days"
    data = minimal()
    data["root_classes"]["primary"]["radius_cm"] = -0.1
    err = error_of(data)
    assert err.key_path == "root_classes.primary.radius_cm" and "> 0" in str(err)
    data = minimal()
    data["root_classes"]["primary"]["insertion_angle_deg"] = {"low": 10, "high": 200}
    assert "<= 180" in str(error_of(data))


def test_branch_reference_to_missing_class_and_cycles():
    data = minimal()
    data["root_classes"]["primary"]["branches"] = [{"root_class": "laterall"}]
    err = error_of(data)
    assert err.key_path == "root_classes.primary.branches[0].root_class" and "'lateral'" in str(err)
    data = minimal()
    data["root_classes"]["lateral"]["branches"] = [{"root_class": "lateral", "probability": 0.2}]
    assert "branch forever" in str(error_of(data))
    data = minimal()
    data["root_classes"]["lateral"]["branches"] = [{"root_class": "primary"}]
    assert "cycle" in str(error_of(data))
    data = minimal()
    data["emergence"][0]["root_class"] = "nodal"
    assert error_of(data).key_path == "emergence[0].root_class"


def test_distribution_tables():
    data = minimal()
    data["root_classes"]["primary"]["elongation_rate_cm_per_day"] = {"mean": 2.0, "standard_deviation": 0.5}
    data["root_classes"]["primary"]["max_length_cm"] = {"low": 10.0, "high": 20.0}
    spec = parse_spec(data)
    assert spec.root_classes["primary"].elongation_rate_cm_per_day == Normal(2.0, 0.5)
    assert spec.root_classes["primary"].max_length_cm == Uniform(10.0, 20.0)
    data["root_classes"]["primary"]["max_length_cm"] = {"mean": 10.0}
    assert "standard_deviation" in str(error_of(data))


def test_truncated_normal_draws_respect_range_and_match_truncated_moments():
    # Reference: scipy.stats.truncnorm (independent implementation of the truncated normal).
    from scipy.stats import truncnorm

    dist = Normal(0.5, 1.0)
    valid = PARAMETER_RANGES["elongation_rate_cm_per_day"]  # [0, 100]
    u = np.random.default_rng(3).random(200_000)
    x = dist.from_uniform(u, valid)
    assert x.min() >= 0.0
    ref = truncnorm((0 - 0.5) / 1.0, (100 - 0.5) / 1.0, loc=0.5, scale=1.0)
    assert abs(x.mean() - ref.mean()) < 4 * ref.std() / np.sqrt(len(x))


def test_overrides_are_validated():
    spec = parse_spec(minimal(), source="trial.toml")
    assert spec.with_overrides(duration_days=9, seed=4).run.duration_days == 9
    with pytest.raises(SpecError) as info:
        spec.with_overrides(time_step_days=-1)
    assert info.value.key_path == "run.time_step_days"
    with pytest.raises(SpecError):
        spec.with_overrides(time_step_days=50)


def test_container_geometry_required():
    data = minimal()
    data["container"] = {"kind": "pot", "diameter_cm": 20}
    assert "depth_cm" in str(error_of(data))
    data["container"] = {"kind": "field", "diameter_cm": 20}
    assert "takes no" in str(error_of(data))


def test_cli_check_ok_and_error(tmp_path, capsys):
    assert main(["check", str(SHIPPED[0])]) == 0
    assert "ok:" in capsys.readouterr().out
    bad = tmp_path / "bad.toml"
    bad.write_text(SHIPPED[0].read_text().replace("radius_cm", "radios_cm", 1))
    assert main(["check", str(bad)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith(f"error: {bad}: ") and "radius_cm" in err and len(err.splitlines()) == 1
    assert main(["check", str(tmp_path / "missing.toml")]) == 2
    (tmp_path / "broken.toml").write_text("[run\nduration_days = 3")
    assert main(["check", str(tmp_path / "broken.toml")]) == 2
    assert "not valid TOML" in capsys.readouterr().err


# -- property test: random mutations of the shipped files only ever raise SpecError -------------------

_SHIPPED_DATA = [tomllib.loads(p.read_text()) for p in SHIPPED]
_VALUES = st.one_of(
    st.none(), st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=8), st.lists(st.integers(), max_size=3), st.dictionaries(st.text(max_size=6), st.floats(), max_size=3),
)


def _paths(node, prefix=()):
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, prefix + (i,))


def _get(node, path):
    for p in path:
        node = node[p]
    return node


@st.composite
def mutated(draw):
    data = copy.deepcopy(draw(st.sampled_from(_SHIPPED_DATA)))
    for _ in range(draw(st.integers(1, 4))):
        paths = [p for p in _paths(data) if p]
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = _get(data, path[:-1])
        action = draw(st.sampled_from(["replace", "delete", "rename", "insert"]))
        key = path[-1]
        if action == "replace":
            parent[key] = draw(_VALUES)
        elif action == "delete":
            del parent[key]
        elif action == "rename" and isinstance(parent, dict):
            parent[draw(st.text(min_size=1, max_size=12))] = parent.pop(key)
        elif action == "insert" and isinstance(parent, dict):
            parent[draw(st.text(min_size=1, max_size=12))] = draw(_VALUES)
    return data


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated())
def test_mutated_shipped_files_raise_only_spec_errors(data):
    try:
        parse_spec(data, source="mutant.toml")
    except SpecError as exc:
        assert exc.cli_message().startswith("mutant.toml: ")
        assert "\n" not in exc.cli_message()
