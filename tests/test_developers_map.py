"""DEVELOPERS.md's map of the code matches the tree: every package and top-level module of
clinic/ is in the Layout block, and everything the block names exists."""
from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _layout_block() -> list[str]:
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    section = text.split("## Layout", 1)[1]
    block = section.split("```", 2)[1]
    return block.splitlines()


def _named_under_clinic() -> set[str]:
    """Names at the first indent under ``clinic/`` in the block (``records/``, ``config.py`` ...)."""
    names = set()
    for line in _layout_block():
        m = re.match(r"^  (\S+)\s", line + " ")
        if m and (m.group(1).endswith("/") or m.group(1).endswith(".py")):
            names.add(m.group(1).rstrip("/"))
    return names


def test_every_package_and_module_of_clinic_is_on_the_map():
    tree = {p.name for p in (ROOT / "clinic").iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    tree |= {p.stem for p in (ROOT / "clinic").glob("*.py") if p.name != "__init__.py"}
    named = {n.removesuffix(".py") for n in _named_under_clinic()}
    assert tree - named == set(), f"missing from DEVELOPERS.md's Layout: {sorted(tree - named)}"
    assert named - tree == set(), f"named in DEVELOPERS.md's Layout but not in clinic/: {sorted(named - tree)}"


def test_top_level_folders_on_the_map_exist():
    for line in _layout_block():
        m = re.match(r"^(\S+/)\s", line)
        if m and not m.group(1).startswith("tests/<"):
            assert (ROOT / m.group(1)).is_dir(), f"DEVELOPERS.md names {m.group(1)}, which is not in the tree"


def test_the_map_reader_sees_the_block():
    # guards the two tests above against passing on an empty parse
    assert {"records", "care", "store", "web", "cli"} <= {n.removesuffix(".py") for n in _named_under_clinic()}
