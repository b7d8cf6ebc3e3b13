"""Golden-file comparison: BREATHFLEET_UPDATE_GOLDEN=1 rewrites the files under tests/golden/."""

from __future__ import annotations

import os
import re
from pathlib import Path

from pipeline import __version__
from pipeline.settings import Settings

GOLDEN = Path(__file__).resolve().parent / "golden"
_PNG = re.compile(r"data:image/png;base64,[A-Za-z0-9+/=]+")


def normalise(text: str) -> str:
    """Replace embedded PNGs, the settings digest and the software version by placeholders.

    PNG bytes depend on the vl-convert build and are tested for determinism apart; the settings digest
    changes whenever any feature adds a setting, and is asserted apart against Settings().digest().
    """
    text = _PNG.sub("data:image/png;base64,<png>", text)
    text = text.replace(Settings().digest(), "<settings-digest>")
    return text.replace(f"breathfleet {__version__}", "breathfleet <version>")


def check_golden(name: str, text: str) -> None:
    path = GOLDEN / name
    text = normalise(text)
    if os.environ.get("BREATHFLEET_UPDATE_GOLDEN") == "1" or not path.exists():
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    assert text == path.read_text(encoding="utf-8"), f"{name} differs from its golden file; " \
        f"if the change is intended, rerun with BREATHFLEET_UPDATE_GOLDEN=1 and review the diff"
