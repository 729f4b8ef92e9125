#!/usr/bin/env python3
"""Makes assets/fonts/FigureSans.ttf, the font of stillpoint's figures (src/figure/):
a subset of DejaVu Sans (Debian package fonts-dejavu-core, DejaVu Sans 2.37) holding
printable ASCII, Latin-1 letters and signs, Greek, superscript digits and signs, and the
few symbols the figures use (ħ, √, ±, ×, −, combining macron for n̄, µ, °, …).

Run from the repository root (needs `apt-get install fonts-dejavu-core` and
`pip install fonttools==4.68.0`):  python3 assets/fonts/make_subset.py
The licence of DejaVu Sans is in assets/fonts/LICENSE-DejaVu.txt (the subset is renamed
"FigureSans" as the Bitstream Vera terms ask of modified fonts).
"""
from fontTools import subset
from fontTools.ttLib import TTFont

SOURCE = "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf"
OUT = "assets/fonts/FigureSans.ttf"
CODEPOINTS = (
    list(range(0x20, 0x7F))
    + list(range(0xA0, 0x100))
    + list(range(0x391, 0x3AA)) + list(range(0x3B1, 0x3CA))
    + [0x2070, 0x00B9, 0x00B2, 0x00B3] + list(range(0x2074, 0x208F)) + list(range(0x2090, 0x209D))
    + [0x0127, 0x0304, 0x2212, 0x221A, 0x221E, 0x2248, 0x2264, 0x2265, 0x2013, 0x2014,
       0x2026, 0x2022, 0x27E8, 0x27E9, 0x2032, 0x2033, 0x2009, 0x202F, 0x2126, 0x210F]
)

options = subset.Options()
options.layout_features = ["kern", "mark", "mkmk", "ccmp"]
options.hinting = False
options.name_IDs = [0, 1, 2, 3, 4, 5, 6]
font = subset.load_font(SOURCE, options)
subsetter = subset.Subsetter(options)
subsetter.populate(unicodes=CODEPOINTS)
subsetter.subset(font)
for record in font["name"].names:
    if record.nameID in (1, 4, 6, 3):
        text = record.toUnicode().replace("DejaVu Sans", "FigureSans").replace("DejaVuSans", "FigureSans")
        record.string = text
font.save(OUT)
print(OUT, "glyphs:", len(TTFont(OUT).getGlyphOrder()))
