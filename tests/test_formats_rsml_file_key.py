"""RSML ``<metadata><file-key>``: the name the file is known by, never the temporary name it was written under.

`rootsim export --rsml` writes every output under a hidden temporary name (``rootsim.atomic.atomic_paths``) and
renames the set at the end; the key inside the file must be the final file's name. Files are read with the
standard library's XML parser (not our reader)."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from rootsim.cli import main
from rootsim.formats import export_file
from rootsim.formats.rsml import write_rsml
from rootsim.result_folder import temporary_name

from test_formats_helpers import random_root_system


def _file_key(path) -> str:
    return ET.parse(path).getroot().find("metadata/file-key").text


def test_cli_export_writes_the_final_file_name_as_file_key(tmp_path, capsys):
    source = tmp_path / "results"
    source.mkdir()
    random_root_system(rng=5).write(source / "segments.parquet")
    target = tmp_path / "exported" / "trial_plot_7.rsml"
    assert main(["export", str(source), "--rsml", str(target), "--vtk", str(tmp_path / "exported" / "r.vtp")]) == 0, \
        capsys.readouterr().err
    assert _file_key(target) == "trial_plot_7"
    # no trace of the temporary name anywhere in the file, and no temporary file left beside it
    assert ".rootsim-" not in target.read_text(encoding="utf-8")
    assert sorted(p.name for p in target.parent.iterdir()) == ["r.vtp", "trial_plot_7.rsml"]


def test_writer_given_a_temporary_name_keys_the_final_file(tmp_path):
    system = random_root_system(rng=6)
    temporary = tmp_path / temporary_name("roots_day30.rsml", "part.rsml")
    write_rsml(system, temporary)
    assert _file_key(temporary) == "roots_day30"
    # an explicit key wins; a plain path keys its own stem
    write_rsml(system, tmp_path / "a.rsml", file_key="variant steep, replicate 2")
    assert _file_key(tmp_path / "a.rsml") == "variant steep, replicate 2"
    assert _file_key(export_file(system, tmp_path / "plain.name.rsml")) == "plain.name"
