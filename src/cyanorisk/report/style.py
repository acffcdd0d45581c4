"""How the pages look: the level badges (a text label, a shape and a colour per level, so that no
reader depends on colour alone), the palette and the style sheet, for screens, phones and A4.

The palette is our own, chosen so that the four roles differ in lightness as well as hue (they
stay apart in greyscale and for the common colour-vision deficiencies). A guideline's own
colours (NHMRC's green, amber and red) are used only for the levels it names so.
"""

from __future__ import annotations

import html

from cyanorisk.levels import Level, Role

ROLE_COLOURS = {Role.NONE: "#1d5c8a", Role.VIGILANCE: "#7a5d00", Role.ALERT: "#b34700",
                Role.ACTION: "#5e2a6e"}
"""Badge colours by role (our own palette; white text on each has a contrast above 4.5:1)."""
INSUFFICIENT_COLOUR = "#4a4a4a"

SHAPES = {
    Role.NONE: '<circle cx="12" cy="12" r="9"/>',
    Role.VIGILANCE: '<polygon points="12,2 22,12 12,22 2,12"/>',
    Role.ALERT: '<polygon points="12,2 23,21 1,21"/>',
    Role.ACTION: '<polygon points="8,2 16,2 22,8 22,16 16,22 8,22 2,16 2,8"/>',
}
"""A distinct shape per role: circle, diamond, triangle, octagon."""


def level_colour(level: Level | None) -> str:
    if level is None:
        return ROLE_COLOURS[Role.NONE]
    return level.colour or ROLE_COLOURS[level.role]


def level_colours(n: int, levels: tuple[Level, ...] = ()) -> list[str]:
    """Line colours for ``n`` levels (their own where given, else by position)."""
    if levels:
        return [level_colour(lvl) for lvl in levels][:n]
    cycle = [ROLE_COLOURS[Role.VIGILANCE], ROLE_COLOURS[Role.ALERT], ROLE_COLOURS[Role.ACTION],
             "#333333"]
    return [cycle[min(i, len(cycle) - 1)] for i in range(n)]


def badge(text: str, role: Role, colour: str, note: str = "") -> str:
    """A level badge: the shape, then the level's name in capitals, on its colour."""
    e = html.escape
    return (f'<span class="badge" style="background:{colour}" role="img" '
            f'aria-label="{e(text)}"><svg viewBox="0 0 24 24" width="22" height="22" '
            f'aria-hidden="true" fill="#fff">{SHAPES[role]}</svg>'
            f'<span class="badge-text">{e(text.upper())}</span></span>'
            + (f'<span class="badge-note">{e(note)}</span>' if note else ""))


CSS = """
:root { color-scheme: light; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, 'Segoe UI', Roboto, sans-serif; margin: 0 auto;
       padding: 1em; max-width: 60em; color: #1a1a1a; line-height: 1.45; font-size: 15px; }
h1 { font-size: 1.35em; margin: 0 0 0.1em; } h2 { font-size: 1.08em; margin: 1.3em 0 0.4em;
     border-bottom: 1px solid #ccc; break-after: avoid; page-break-after: avoid; }
h3 { font-size: 1em; margin: 0.8em 0 0.3em; break-after: avoid; }
.sub { color: #444; margin-top: 0; }
.strip { border: 2px solid #333; border-radius: 8px; padding: 0.8em 1em; margin: 0.6em 0;
         break-inside: avoid; }
.badge { display: inline-flex; align-items: center; gap: 0.45em; color: #fff; padding: 0.3em 0.8em
         0.3em 0.5em; border-radius: 6px; font-weight: 700; letter-spacing: 0.03em; }
.badge-note { margin-left: 0.6em; font-weight: 600; }
.headline { font-size: 1.12em; font-weight: 600; margin: 0.5em 0; }
.facts { display: grid; grid-template-columns: 10em 1fr; gap: 0.25em 0.8em; margin: 0.4em 0; }
.facts dt { font-weight: 600; color: #333; } .facts dd { margin: 0; }
table { border-collapse: collapse; margin: 0.4em 0; width: 100%; }
table.outlook-strip { width: auto; font-size: 0.85em; }
table.outlook-strip caption { caption-side: bottom; text-align: left; font-size: 0.85em;
  color: #555; padding-top: 0.3em; }
table.outlook-strip td { text-align: center; min-width: 2em; padding: 0.25em 0.2em;
  border: 1px solid #fff; }
table.outlook-strip th { text-align: center; font-weight: normal; padding: 0.2em; }
table.outlook-strip th.lvl { text-align: left; white-space: nowrap; padding-right: 0.6em; }
table.outlook-strip th.head { font-weight: bold; text-decoration: underline; }
table.outlook-strip td.head { box-shadow: inset 0 -3px 0 #1b2a35; }
table.outlook-strip td.warned { outline: 3px solid #b3261e; outline-offset: -3px;
  font-weight: bold; }
p.reliability { font-style: italic; }
td, th { padding: 0.25em 0.6em; border-bottom: 1px solid #ddd; text-align: left;
         vertical-align: top; } th { background: #f1f1f1; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
tr { break-inside: avoid; }
.note { background: #fff6e0; border-left: 4px solid #b34700; padding: 0.4em 0.8em; }
.deferral { font-weight: 600; padding: 0.6em 1em; border-left: 4px solid #333; background: #f6f6f6; }
img { max-width: 100%; height: auto; display: block; margin: 0.4em 0; break-inside: avoid; }
.small { font-size: 0.86em; color: #333; }
.details { break-before: page; page-break-before: always; }
@media (max-width: 40em) {
  body { font-size: 14px; padding: 0.6em; }
  .facts { grid-template-columns: 1fr; } .facts dt { margin-top: 0.4em; }
  table { font-size: 0.9em; } td, th { padding: 0.2em 0.3em; }
  .wide { display: block; overflow-x: auto; }
}
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  .strip { border-width: 1.5pt; }
  .badge, .strip, .note, .deferral { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  a { color: inherit; text-decoration: none; }
}
"""
