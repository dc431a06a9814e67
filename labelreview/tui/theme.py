"""The review app's two colour themes, on Textual's theme machinery.

Sea-green and sand on slate for dark terminals, the same on paper for light ones. Meaning never
rests on colour alone: severity, status and agreement are always written out in words.
"""

from __future__ import annotations

from textual.theme import Theme

DARK = Theme(
    name="labelreview-dark",
    primary="#4f9d96",
    secondary="#b9965b",
    accent="#7aa6c8",
    warning="#d8a43c",
    error="#e0705f",
    success="#86b874",
    foreground="#dde3e6",
    background="#13181c",
    surface="#1a2126",
    panel="#25313a",
    dark=True,
)

LIGHT = Theme(
    name="labelreview-light",
    primary="#2f716b",
    secondary="#80602a",
    accent="#33658c",
    warning="#9a6200",
    error="#b1392b",
    success="#3b7330",
    foreground="#1d2327",
    background="#f3f0e8",
    surface="#faf8f3",
    panel="#e3ddd0",
    dark=False,
)

THEMES: tuple[Theme, ...] = (DARK, LIGHT)
DEFAULT_THEME = DARK.name
