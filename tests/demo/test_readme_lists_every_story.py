"""seed_demo/README.md lists every demo story as it is, so people can find "the missed routine dose"."""
from __future__ import annotations

from pathlib import Path

import seed_demo
from seed_demo.stories import markdown_table

README = Path(seed_demo.__file__).with_name("README.md")


def test_readme_table_is_the_current_story_table():
    assert markdown_table() in README.read_text(encoding="utf-8"), \
        "regenerate the table in seed_demo/README.md with: python -m seed_demo.stories"
