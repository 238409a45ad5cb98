"""The README stays true: the decision table printed there is the one the code uses."""

from __future__ import annotations

from pathlib import Path

from tfhrv.analysis.policy import explain_table

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_decision_table_matches_code():
    text = README.read_text(encoding="utf-8")
    block = text.split("<!-- decision-table -->")[1].split("<!-- /decision-table -->")[0]
    assert block.strip().strip("`").strip() == explain_table().strip()


def test_readme_carries_the_caution_and_two_quick_start_commands():
    text = README.read_text(encoding="utf-8")
    assert "research use" in text[:1500].lower()
    quick = text.split("## Quick start")[1].split("##")[0]
    commands = [ln for ln in quick.splitlines() if ln.startswith("make ")]
    assert [c.split()[1] for c in commands] == ["demo", "test"]
