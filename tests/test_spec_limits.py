"""Specs that validate but cannot be grown, and hostile TOML, are refused by `check` with the limit named."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from rootsim import limits
from rootsim.cli import main
from rootsim.spec import load_spec

PARAMS = Path(__file__).resolve().parents[1] / "params"
TAPROOT = (PARAMS / "taproot_laterals.toml").read_text()


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and len(err.splitlines()) == 1, err
    return err


def write(tmp_path, text: str, name: str = "variant.toml") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def replace_key(text: str, section: str, key: str, value: str) -> str:
    """Set ``key = value`` in ``[section]`` (appended to the section if absent)."""
    header = f"[{section}]"
    if header not in text:
        return text + f"\n{header}\n{key} = {value}\n"
    start = text.index(header) + len(header)
    end = text.find("\n[", start)
    end = len(text) if end < 0 else end
    body = text[start:end]
    pattern = re.compile(rf"^{key}\s*=.*$", re.M)
    body = pattern.sub(f"{key} = {value}", body) if pattern.search(body) else body + f"{key} = {value}\n"
    return text[:start] + body + text[end:]


def test_shipped_files_pass_the_growability_limits():
    for path in sorted(PARAMS.glob("*.toml")):
        limits.check_growable(load_spec(path))


@pytest.mark.parametrize("section,key,value,named", [
    ("stand", "rows", "1000", "plants"),                                    # with 10,000 per row: 10^7 plants
    ("container", "kind", '"pot"\ndiameter_cm = 1e308\ndepth_cm = 50', "container.diameter_cm"),
    ("run", "max_segments", "1000000000000", "run.max_segments"),
    ("stand", "row_spacing_cm", "1e300", "stand.row_spacing_cm"),
])
def test_ungrowable_stands_and_containers(tmp_path, capsys, section, key, value, named):
    text = replace_key(TAPROOT, section, key, value)
    if key == "rows":
        text = replace_key(text, "stand", "plants_per_row", "10000")
    assert main(["check", str(write(tmp_path, text))]) == 2
    err = one_error_line(capsys)
    assert named in err and "allowed: at most" in err and "variant.toml" in err


def test_ten_to_the_eight_roots_per_plant(tmp_path, capsys):
    text = TAPROOT.replace("[[emergence]]", "[[emergence]]\nevent_count = 10000\nroots_per_event = 10000\ninterval_days = 0.001", 1)
    assert main(["check", str(write(tmp_path, text))]) == 2
    err = one_error_line(capsys)
    assert "emergence[0]" in err and "100,000,000 roots per plant" in err and f"{limits.MAX_EMERGING_ROOTS_PER_PLANT:,}" in err


def test_emerging_roots_must_fit_the_segment_budget(tmp_path, capsys):
    # 4 plants x 5,000 roots each = 20,000 roots, each at least one segment: more than a budget of 10,000
    text = TAPROOT.replace("[[emergence]]", "[[emergence]]\nroots_per_event = 5000", 1)
    text = replace_key(text, "run", "max_segments", "10000")
    assert main(["check", str(write(tmp_path, text))]) == 2
    assert "segment budget of 10,000" in one_error_line(capsys)
    assert main(["grow", str(write(tmp_path, TAPROOT)), "--out", str(tmp_path / "out"), "--max-segments", "1"]) == 2
    assert "segment budget of 1" in one_error_line(capsys)
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("text,named", [
    ("x = " + "[" * 1000 + "]" * 1000 + "\n", "nested 1000 deep"),
    ("x = " + "{a = " * 1000 + "1" + "}" * 1000 + "\n", "nested 1000 deep"),
    ("x = " + "7" * 100_000 + "\n", "100,000 digits"),
    (".".join(["a"] * 100_000) + " = 1\n", "100,000 dotted parts"),
    ("[" + ".".join(["t"] * 5_000) + "]\n", "5,000 dotted parts"),
    ("name = 'x'\n" + "# padding\n" * 200_000, "bytes"),
], ids=["arrays-1000-deep", "tables-1000-deep", "100000-digits", "100000-part-key", "5000-part-header", "2-MB"])
def test_hostile_toml_is_bounded_before_parsing(tmp_path, capsys, text, named):
    assert main(["check", str(write(tmp_path, text))]) == 2
    err = one_error_line(capsys)
    assert named in err and "variant.toml" in err and "allowed" in err


def test_long_float_arrays_and_dotted_strings_are_fine(tmp_path):
    # decimal points of numbers and dots inside strings are not key separators
    values = ", ".join(f"{i}.5" for i in range(200))
    text = TAPROOT.replace('name = "', f'weights = [{values}]\nnote = "{"." * 300}"\nname = "', 1)
    from rootsim.toml_input import parse_toml_text

    data = parse_toml_text(text, source="x.toml")
    assert data["weights"][3] == 3.5 and data["note"] == "." * 300
