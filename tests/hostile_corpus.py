"""A corpus of hostile and damaged inputs, made on the fly in a folder.

Each case is a function ``case(folder) -> (argv, expected)`` that writes the
small files it needs (bombs are generated here, never stored) and returns the
``zoneprofile`` arguments that must be refused with exit 2 and one line
holding ``expected``. Outputs go to ``folder / "out"`` so a test can check
that nothing was written. All data are invented.
"""

from __future__ import annotations

import io
import zipfile
from pathlib import Path

import numpy as np

# ---------------------------------------------------------------- base tables

_HEADER = "Point,X (mm),Y (mm),SiO2,Al2O3,FeO,MgO,CaO,Na2O,K2O,Total,Comment"
# invented plagioclase analyses along a straight traverse (3 µm steps), An 52 -> 68
_ROWS = [
    ("P1", 55.06, 28.63, 10.77, 5.43), ("P2", 54.96, 28.70, 10.86, 5.38), ("P3", 54.78, 28.82, 11.00, 5.30),
    ("P4", 52.91, 30.08, 12.47, 4.43), ("P5", 50.98, 31.38, 14.00, 3.54), ("P6", 50.80, 31.50, 14.14, 3.46),
    ("P7", 50.68, 31.59, 14.23, 3.40), ("P8", 50.78, 31.52, 14.16, 3.45), ("P9", 50.71, 31.55, 14.20, 3.43),
    ("P10", 50.75, 31.53, 14.18, 3.44), ("P11", 50.70, 31.56, 14.21, 3.42), ("P12", 50.74, 31.54, 14.19, 3.44),
]


def plag_rows(n: int = 12) -> list[str]:
    """Data lines of the base table: stage X/Y in mm, oxides in wt%."""
    out = []
    for k, (label, si, al, ca, na) in enumerate(_ROWS[:n]):
        x, y = 12.3456 + 0.0026 * k, 20.1111 + 0.0015 * k
        total = si + al + 0.42 + ca + na + 0.10
        out.append(f"{label},{x:.4f},{y:.4f},{si:.2f},{al:.2f},0.42,<0.03,{ca:.2f},{na:.2f},0.10,{total:.2f},plag c2")
    return out


def plag_table(folder: Path, name: str = "plag.csv", rows=None, header: str = _HEADER) -> Path:
    p = Path(folder) / name
    p.write_text("\n".join([header, *(plag_rows() if rows is None else rows)]) + "\n", encoding="utf-8")
    return p


def profile_table(folder: Path, name: str = "profile.csv", text: str | None = None) -> Path:
    """A small Sr/An profile across one boundary (invented)."""
    p = Path(folder) / name
    if text is None:
        x = np.arange(0.0, 60.0, 2.0)
        lines = ["distance_um,Sr_ppm,An"] + [f"{v:g},{900 if v < 30 else 600},60" for v in x]
        text = "\n".join(lines) + "\n"
    p.write_text(text, encoding="utf-8")
    return p


def _out(folder: Path, name: str) -> str:
    out = Path(folder) / "out"
    out.mkdir(exist_ok=True)
    return str(out / name)


def recalc(folder, table) -> list[str]:
    return ["recalc", str(table), "-o", _out(folder, "profile.csv")]


FIT = ["--element", "Sr", "--mineral", "plagioclase", "--temperature-c", "1000", "--draws", "50"]


def fit(folder, profile, *extra) -> list[str]:
    return ["fit", str(profile), *FIT, *extra, "-o", _out(folder, "fit.json")]


def zones(folder, profile, *extra) -> list[str]:
    return ["zones", str(profile), *extra, "-o", _out(folder, "zones.json")]


# ---------------------------------------------------------------- table cases


def decimal_comma_in_csv(d):
    rows = plag_rows()
    rows[4] = rows[4].replace(",14.00,", ",14,00,")  # CaO written with a decimal comma
    return recalc(d, plag_table(d, rows=rows)), "decimal commas in a comma-separated file"


def decimal_comma_in_profile(d):
    text = "distance_um,Sr_ppm,An\n" + "".join(f"{x},{900 if x < 30 else 600},60\n" for x in range(0, 20, 2))
    text += "20,600,52,2\n" + "".join(f"{x},600,60\n" for x in range(22, 60, 2))
    return fit(d, profile_table(d, text=text)), "row 12"


def unclosed_quote(d):
    rows = plag_rows()
    rows[3] = rows[3].replace("plag c2", '"plag c2')
    return recalc(d, plag_table(d, rows=rows)), "never closed"


def stray_quote_swallows_rows(d):
    rows = plag_rows()
    rows[2] = rows[2].replace("plag c2", '"plag c2')
    rows[8] = rows[8].replace("plag c2", 'plag c2"')
    return recalc(d, plag_table(d, rows=rows)), "swallows"


def underscore_in_profile(d):
    text = "distance_um,Sr_ppm,An\n" + "".join(f"{x},{900 if x < 30 else 600},60\n" for x in range(0, 60, 2))
    text = text.replace("\n10,900,60\n", "\n10,9_00,60\n")
    return fit(d, profile_table(d, text=text)), "not a number"


def negative_profile_start(d):
    text = "distance_um,Sr_ppm,An\n" + "".join(f"{x},{900 if x < 0 else 600},60\n" for x in range(-30, 30, 2))
    return fit(d, profile_table(d, text=text)), "measured from the rim"


def lost_rows_between_analyses(d):
    rows = plag_rows()
    for k in (3, 6):  # analyses that lost their numbers: label and position only
        cells = rows[k].split(",")
        rows[k] = ",".join(cells[:3] + [""] * (len(cells) - 3))
    return recalc(d, plag_table(d, rows=rows)), "hold no oxide value"


def rim_point_off_line(d):
    rows = plag_rows()
    cells = rows[0].split(",")
    cells[1] = "12.5456"  # a mistyped digit: 200 µm off
    rows[0] = ",".join(cells)
    return recalc(d, plag_table(d, rows=rows)), "rim point lies"


def long_cell(d):
    rows = plag_rows()
    rows[2] = rows[2].replace("plag c2", "x" * 140_000)
    return recalc(d, plag_table(d, rows=rows)), "characters"


def utf16_bad_cell(d):
    text = "distance_um,Sr_ppm,An\n0,900,60\n2,abc,60\n4,600,60\n"
    p = Path(d) / "u16.csv"
    p.write_bytes(text.encode("utf-16"))
    return fit(d, p), "row 3"


# ---------------------------------------------------------------- workbooks


def _xlsx_bytes(sheet_xml: bytes, *, extra=None) -> bytes:
    """A minimal workbook with one sheet (written by hand, so parts can be made hostile)."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("[Content_Types].xml", (
            '<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.openxmlformats.org/package/2006/'
            'content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-package.'
            'relationships+xml"/><Default Extension="xml" ContentType="application/xml"/><Override PartName='
            '"/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.'
            'main+xml"/><Override PartName="/xl/worksheets/sheet1.xml" ContentType="application/vnd.'
            'openxmlformats-officedocument.spreadsheetml.worksheet+xml"/></Types>'))
        z.writestr("_rels/.rels", (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/package/'
            '2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/'
            '2006/relationships/officeDocument" Target="xl/workbook.xml"/></Relationships>'))
        z.writestr("xl/workbook.xml", (
            '<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="http://schemas.openxmlformats.org/'
            'spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
            '<sheets><sheet name="traverse" sheetId="1" r:id="rId1"/></sheets></workbook>'))
        z.writestr("xl/_rels/workbook.xml.rels", (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/package/'
            '2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/'
            '2006/relationships/worksheet" Target="worksheets/sheet1.xml"/></Relationships>'))
        z.writestr("xl/worksheets/sheet1.xml", sheet_xml)
        for name, data in (extra or {}).items():
            z.writestr(name, data)
    return buf.getvalue()


_NS = b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'


def xlsx_bomb(d):
    # one part that inflates about 1000-fold: empty rows, as a hostile export would hold
    body = _NS + b'<row r="1"/>' * 3_000_000 + b"</sheetData></worksheet>"
    p = Path(d) / "bomb.xlsx"
    p.write_bytes(_xlsx_bytes(body))
    return recalc(d, p), "inflate"


def xlsx_broken_xml(d):
    p = Path(d) / "broken.xlsx"
    p.write_bytes(_xlsx_bytes(_NS + b'<row r="1"><c r="A1" t="inlineStr"><is><t>SiO2</t></is></c>'))
    return recalc(d, p), "cannot read"


def xlsx_bad_zlib(d):
    good = _xlsx_bytes(_NS + b"</sheetData></worksheet>")
    # damage the compressed bytes of the sheet part, keep the zip directory intact
    k = good.find(b"xl/worksheets/sheet1.xml") + len("xl/worksheets/sheet1.xml")
    damaged = good[:k] + bytes(b ^ 0x5A for b in good[k:k + 20]) + good[k + 20:]
    p = Path(d) / "zlib.xlsx"
    p.write_bytes(damaged)
    return recalc(d, p), "cannot read"


def xlsx_uncached_formulas(d):
    cells = []
    for j, name in enumerate(["SiO2", "Al2O3", "CaO", "Na2O"]):
        col = "ABCD"[j]
        cells.append(f'<c r="{col}1" t="inlineStr"><is><t>{name}</t></is></c>')
    row1 = '<row r="1">' + "".join(cells) + "</row>"
    rows = [row1] + [
        f'<row r="{r}">' + "".join(f'<c r="{c}{r}"><f>1+1</f></c>' for c in "ABCD") + "</row>" for r in (2, 3, 4)
    ]
    body = _NS + "".join(rows).encode() + b"</sheetData></worksheet>"
    p = Path(d) / "formulas.xlsx"
    p.write_bytes(_xlsx_bytes(body))
    return recalc(d, p), "formula"


# ---------------------------------------------------------------- images


def png_oversized(d):
    import struct
    import zlib

    def chunk(kind, data):
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)

    # header only: a 9 x 10^8-pixel grey image, between Pillow's warning and error sizes
    ihdr = struct.pack(">IIBBBBB", 30_000, 30_000, 8, 0, 0, 0, 0)
    p = Path(d) / "huge_Ca.png"
    p.write_bytes(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IEND", b""))
    spots = Path(d) / "spots.csv"
    spots.write_text("x_px,y_px,An\n1,1,50\n2,2,60\n3,3,70\n")
    return ["map", str(p), "--pixel-um", "1", "--spots", str(spots), "--line", "0,0,5,5", "-o",
            _out(d, "map.csv")], "pixels accepted for PNG"


# ---------------------------------------------------------------- CLI numbers


def seed_negative(d):
    return fit(d, profile_table(d), "--seed", "-1"), "--seed"


def beam_huge(d):
    return fit(d, profile_table(d), "--beam-um", "1e6"), "--beam-um"


def temperature_sd_huge(d):
    return fit(d, profile_table(d), "--temperature-sd-c", "10000"), "--temperature-sd-c"


def distances_huge(d):
    text = "distance_um,Sr_ppm,An\n" + "".join(f"{x * 1e9:g},{900 if x < 30 else 600},60\n" for x in range(0, 60, 2))
    return fit(d, profile_table(d, text=text)), "distance_um"


def noise_sd_tiny(d):
    return zones(d, profile_table(d), "--column", "Sr_ppm", "--noise-sd", "1e-300"), "--noise-sd"


def width_px_huge(d):
    spots = Path(d) / "spots.csv"
    spots.write_text("x_px,y_px,An\n1,1,50\n2,2,60\n3,3,70\n")
    img = Path(d) / "m_Ca.npy"
    np.save(img, np.ones((20, 20), np.uint16))
    return ["map", str(img), "--pixel-um", "1", "--spots", str(spots), "--line", "1,1,15,15", "--width-px",
            "1000000", "-o", _out(d, "map.csv")], "--width-px"


def underscore_option(d):
    return fit(d, profile_table(d), "--temperature-sd-c", "1_0"), "--temperature-sd-c"


CASES = {
    f.__name__: f
    for f in (
        decimal_comma_in_csv, decimal_comma_in_profile, unclosed_quote, stray_quote_swallows_rows,
        underscore_in_profile, negative_profile_start, lost_rows_between_analyses, rim_point_off_line,
        long_cell, utf16_bad_cell, xlsx_bomb, xlsx_broken_xml, xlsx_bad_zlib, xlsx_uncached_formulas,
        png_oversized, seed_negative, beam_huge, temperature_sd_huge, distances_huge, noise_sd_tiny,
        width_px_huge, underscore_option,
    )
}
