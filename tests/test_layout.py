"""The package's shape, as the style guide asks: one concern per module."""

from __future__ import annotations

from conftest import ROOT

# The style guide (STYLE.md): "A module stays under roughly 600 lines; when it grows past
# that, it is two concerns."
MOST_LINES = 600


def test_every_module_of_the_package_stays_within_the_style_guides_length():
    long = {str(path.relative_to(ROOT)): lines
            for path in sorted((ROOT / "rebalance").rglob("*.py"))
            if (lines := path.read_text().count("\n")) > MOST_LINES}
    assert long == {}
