"""Rooms of one job: no module under clinic/ passes 600 lines (split it by job when it grows)."""
from pathlib import Path

LIMIT = 600
CLINIC = Path(__file__).resolve().parents[1] / "clinic"


def test_no_module_under_clinic_is_over_600_lines():
    sizes = {p.relative_to(CLINIC.parent).as_posix(): len(p.read_text(encoding="utf-8").splitlines())
             for p in CLINIC.rglob("*.py")}
    assert len(sizes) > 50  # the walk found the package
    over = {name: n for name, n in sizes.items() if n > LIMIT}
    assert over == {}, f"modules over {LIMIT} lines: {over}"
