"""Where the bundled, invented demo literature lives (works for wheel and editable installs)."""
from __future__ import annotations

from pathlib import Path

DEMO_SHEET = "break_and_proofreading.csv"


def demo_sheet_path() -> Path:
    """Path of the bundled demo sheet (an invented literature; see its README)."""
    try:
        from importlib.resources import files
        p = files("pooler.demo_literature").joinpath(DEMO_SHEET)
        if p.is_file():
            return Path(str(p))
    except (ModuleNotFoundError, TypeError):
        pass
    p = Path(__file__).resolve().parent.parent / "demo_literature" / DEMO_SHEET
    if p.is_file():
        return p
    raise FileNotFoundError("the demo literature is not installed; reinstall pooler")
