"""The README's promises that a test can keep: two commands, the settings table, the cautions."""

from __future__ import annotations

import re
from pathlib import Path

from service.config import LIMIT_SETTINGS, SETTINGS

README = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")


def test_every_setting_is_in_the_configuration_table():
    rows = set(re.findall(r"^\| `([A-Z0-9_]+)` \|", README, flags=re.M))
    names = {s.name for s in (*SETTINGS, *LIMIT_SETTINGS)}
    assert names - rows == set(), "settings missing from the README table"


def test_exactly_two_shell_commands_before_the_walk_through():
    head = README.split("## ", 1)[0]
    blocks = re.findall(r"```sh\n(.*?)```", head, flags=re.S)
    assert len(blocks) == 2 and all(len(b.strip().splitlines()) == 1 for b in blocks)
    assert "boundwise serve" in blocks[0] and "pytest" in blocks[1]


def test_ci_runs_the_readme_test_command():
    ci = (Path(__file__).resolve().parents[1] / ".ci" / "run").read_text(encoding="utf-8")
    assert "python3 -m pip install --quiet -e '.[test]'" in ci and "python3 -m pytest" in ci


def test_the_cautions_are_there():
    assert "A plan is only as good as the model" in README
    assert "safety rules and\nlicensed practice" in README or "safety rules and licensed practice" in README
