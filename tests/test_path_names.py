"""User names that become file or folder names: one safe component, or a one-line error."""

from __future__ import annotations

import pytest

from rootsim.errors import RootsimError
from rootsim.path_names import MAX_NAME_BYTES, safe_path_component


@pytest.mark.parametrize("name,expected", [
    ("my variant", "my_variant"),
    ("../../escaped", "escaped"),
    ("/etc/passwd", "etc_passwd"),
    ("C:\\trial\\v1", "C_trial_v1"),
    ("._hidden", "hidden"),
    ("Ünïcode name.v2", "Unicode_name.v2"),
    ("early+late-sown_3", "early+late-sown_3"),
])
def test_names_become_one_visible_component(name, expected):
    assert safe_path_component(name) == expected


@pytest.mark.parametrize("name,problem", [
    ("..", "no usable file name"),
    ("/", "no usable file name"),
    ("a\x00b", "control characters"),
    ("tab\there", "control characters"),
    ("x" * (MAX_NAME_BYTES + 1), "characters long"),
])
def test_unusable_names_are_one_line_errors(name, problem):
    with pytest.raises(RootsimError, match=problem) as info:
        safe_path_component(name, what="params/a.toml: name")
    assert "\n" not in str(info.value) and str(info.value).startswith("params/a.toml: name")
