"""README's commands refer to files that are shipped and do not collide with each other's output folders."""

from __future__ import annotations

import re
from pathlib import Path

from rootsim.fitting import read_observed_profile

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _code_blocks(text: str) -> list[str]:
    return re.findall(r"```bash\n(.*?)```", text, flags=re.S)


def _first_session() -> str:
    section = README.split("## A first session", 1)[1]
    return _code_blocks(section)[0]


def test_every_params_file_named_in_a_command_is_shipped():
    named = set()
    for block in _code_blocks(README):
        named |= set(re.findall(r"\bparams/[\w./-]+\.(?:toml|csv)\b", block))
    assert named  # the README does run shipped files
    missing = sorted(n for n in named if "*" not in n and not (ROOT / n).is_file())
    assert not missing


def test_the_fit_example_reads_its_observed_profile():
    match = re.search(r"rootsim fit params/cereal_fibrous.toml --observed (\S+) --days 45", README)
    path = ROOT / match.group(1)
    table = read_observed_profile(path)
    assert len(table) >= 3 and (table["rld_cm_per_cm3"] > 0).all()
    assert "INVENTED" in path.read_text(encoding="utf-8").splitlines()[0].upper()  # says it is invented


def test_the_first_session_does_not_write_into_the_top_commands_study_folder():
    top = README.split("## A first session", 1)[0]
    top_outs = set(re.findall(r"rootsim study run \S+ --out (\S+)", top))
    session_outs = re.findall(r"rootsim study run \S+ --out (\S+)", _first_session())
    assert top_outs and session_outs
    assert not top_outs & set(session_outs)  # a study folder with finished runs is refused without --resume


def test_every_shipped_parameter_file_is_in_the_table():
    table = README.split("## Shipped architectures", 1)[1].split("\n## ", 1)[0]
    listed = set(re.findall(r"`([\w./-]+\.(?:toml|csv|npy))`", table))
    shipped = {str(p.relative_to(ROOT / "params")) for p in (ROOT / "params").rglob("*")
               if p.suffix in (".toml", ".csv", ".npy")}
    assert not sorted(shipped - listed)
