"""Audit of study files with ``[measure.capture]``: a folder named where a file belongs is one error line naming
the study file, the key and that it is a folder; the study stops before any run."""

from __future__ import annotations

from pathlib import Path

import pytest

from rootsim.cli import main

PARAMS = Path(__file__).resolve().parents[1] / "params"
SHIPPED = PARAMS / "studies" / "eastmoor_drying_capture.toml"


@pytest.mark.parametrize("key", ["soil_water_file", "weather_file"])
def test_a_folder_for_a_capture_input_is_named_as_a_folder(tmp_path, capsys, key):
    # It was reported as "file '...' does not exist", which sends the user looking for a missing file.
    text = SHIPPED.read_text().replace('"../soil_compacted_pan.toml"', f'"{PARAMS / "soil_compacted_pan.toml"}"')
    text = text.replace('"../capture/', f'"{PARAMS / "capture"}/')
    folder = tmp_path / "inputs"
    folder.mkdir()
    line = next(l for l in text.splitlines() if l.startswith(key))
    text = text.replace(line, f'{key} = "{folder}"')
    study = tmp_path / "study.toml"
    study.write_text(text)
    assert main(["study", "run", str(study), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"error: {study}: ") and err.count("\n") == 1
    assert f"measure.capture.{key}" in err and "is a folder" in err and "does not exist" not in err
    assert not (tmp_path / "out").exists()


def test_every_study_option_has_a_help_text():
    # `rootsim study sensitivity --help` listed --method, --workers, --scheduler and --resume with no words at all.
    import argparse

    from rootsim.cli import build_parser

    def subparsers(parser):
        for action in parser._actions:
            if isinstance(action, argparse._SubParsersAction):
                yield from action.choices.items()

    study = dict(subparsers(build_parser()))["study"]
    for name, parser in subparsers(study):
        for action in parser._actions:
            if action.option_strings and action.dest != "help":
                assert action.help, f"study {name} {action.option_strings[0]}"
