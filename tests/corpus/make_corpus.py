#!/usr/bin/env python3
"""Writes the hostile-input corpus (tests/corpus/): small files that lot exports get wrong in
practice. tests/suite/hostile.rs states the behaviour each must show. Standard library only.
Regenerate: python3 tests/corpus/make_corpus.py
"""
import os
import zipfile

HERE = os.path.dirname(os.path.abspath(__file__))


def w(name, data):
    with open(os.path.join(HERE, name), "wb") as f:
        f.write(data if isinstance(data, bytes) else data.encode("utf-8"))


def table(header, rows):
    return "\n".join([",".join(header)] + [",".join(str(v) for v in r) for r in rows]) + "\n"


# A small, fixed, irregular set of numbers to build lots from.
BASE = [
    (1.21, 3.40, 7.7), (1.35, 3.18, 7.1), (1.02, 3.55, 7.9), (1.44, 3.21, 6.8),
    (1.18, 3.62, 7.3), (1.29, 3.05, 7.6), (1.11, 3.47, 7.2), (1.38, 3.33, 6.9),
]

w("empty.csv", b"")
w("header-only.csv", "x,y,z\n")
w("one-row.csv", "x,y\n1.5,2.5\n")
w("ragged.csv", "x,y,z\n1,2,3\n4,5\n6,7,8\n")
w("duplicate-columns.csv", "Bore (mm),mass,bore\n1,2,3\n4,5,6\n")
w("all-missing-column.csv", table(["x", "y", "z"], [(a, b, "") for a, b, _ in BASE]))
w("constant.csv", table(["x", "y", "gauge"], [(a, b, 5.0) for a, b, _ in BASE]))
w("collinear.csv", table(["x", "y", "x_plus_y"], [(a, b, round(a + b, 2)) for a, b, _ in BASE]))
w("too-few-units.csv", table(["a", "b", "c", "d", "e"], [(1, 2, 3, 4, 5), (2, 1, 4, 3, 6)]))
w("binary.bin", bytes(range(256)) * 4)
w("utf16.csv", "\ufeffx,y\n1.5,2.5\n1.7,2.1\n1.2,2.9\n".encode("utf-16-le").replace(b"\xff\xfe", b"", 1).join([b"\xff\xfe", b""]))
w("latin1.csv", "Rauheit (\u00b5m);Dicke (mm)\n1,5;2,25\n1,7;2,5\n1,2;2,75\n".encode("latin-1"))
w("mixed-delimiters.csv", "x,y,z\n1,2,3\n4;5;6\n7,8,9\n")
w("special-inf.csv", "x,y\n1,2\ninf,3\n4,5\n")
w("special-nan.csv", table(["x", "y"], [(a, b) for a, b, _ in BASE[:4]] + [("NaN", 3.3)] + [(a, b) for a, b, _ in BASE[4:]]))
w("special-huge.csv", table(["x", "y"], [(f"{a}e307", b) for a, b, _ in BASE]))
w("special-subnormal.csv", table(["x", "y"], [(f"{a}e-310", b) for a, b, _ in BASE]))
w("lot-one-value.csv", table(["lot", "x", "y"], [("A", a, b) for a, b, _ in BASE]))
w("lot-three-values.csv", table(["lot", "x", "y"], [("ABC"[i % 3], a, b) for i, (a, b, _) in enumerate(BASE * 2)]))


def col(i):
    s = ""
    i += 1
    while i:
        i, r = divmod(i - 1, 26)
        s = chr(65 + r) + s
    return s


def sheet_xml(rows, merges=()):
    out = []
    for ri, row in enumerate(rows, start=1):
        cells = []
        for ci, v in enumerate(row):
            ref = f"{col(ci)}{ri}"
            if v is None:
                continue
            if isinstance(v, tuple) and v[0] == "formula":
                cells.append(f'<c r="{ref}"><f>{v[1]}</f><v>{v[2]!r}</v></c>')
            elif isinstance(v, tuple) and v[0] == "date":
                cells.append(f'<c r="{ref}" s="1"><v>{v[1]}</v></c>')
            elif isinstance(v, str):
                cells.append(f'<c r="{ref}" t="inlineStr"><is><t>{v}</t></is></c>')
            else:
                cells.append(f'<c r="{ref}"><v>{v!r}</v></c>')
        out.append(f'<row r="{ri}">{"".join(cells)}</row>')
    merge = ""
    if merges:
        merge = f'<mergeCells count="{len(merges)}">' + "".join(f'<mergeCell ref="{m}"/>' for m in merges) + "</mergeCells>"
    return (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
        f"<sheetData>{''.join(out)}</sheetData>{merge}</worksheet>"
    )


def xlsx(name, sheets):
    ct = "".join(
        f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
        for i in range(1, len(sheets) + 1)
    )
    rels = "".join(
        f'<Relationship Id="rId{i}" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" Target="worksheets/sheet{i}.xml"/>'
        for i in range(1, len(sheets) + 1)
    )
    n = len(sheets) + 1
    rels += f'<Relationship Id="rId{n}" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/styles" Target="styles.xml"/>'
    names = "".join(f'<sheet name="{s[0]}" sheetId="{i}" r:id="rId{i}"/>' for i, s in enumerate(sheets, start=1))
    files = {
        "[Content_Types].xml": '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
        '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
        '<Default Extension="xml" ContentType="application/xml"/>'
        '<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
        '<Override PartName="/xl/styles.xml" ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"/>'
        f"{ct}</Types>",
        "_rels/.rels": '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
        '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/>'
        "</Relationships>",
        "xl/workbook.xml": '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
        f"<sheets>{names}</sheets></workbook>",
        "xl/_rels/workbook.xml.rels": '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">{rels}</Relationships>',
        "xl/styles.xml": '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        '<styleSheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
        '<numFmts count="1"><numFmt numFmtId="164" formatCode="yyyy-mm-dd hh:mm"/></numFmts>'
        '<fonts count="1"><font/></fonts><fills count="1"><fill/></fills><borders count="1"><border/></borders>'
        '<cellStyleXfs count="1"><xf/></cellStyleXfs>'
        '<cellXfs count="2"><xf numFmtId="0"/><xf numFmtId="164" applyNumberFormat="1"/></cellXfs>'
        "</styleSheet>",
    }
    for i, (_, rows, merges) in enumerate(sheets, start=1):
        files[f"xl/worksheets/sheet{i}.xml"] = sheet_xml(rows, merges)
    with zipfile.ZipFile(os.path.join(HERE, name), "w", zipfile.ZIP_DEFLATED) as z:
        for fname, content in files.items():
            info = zipfile.ZipInfo(fname, date_time=(2026, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, content.encode("utf-8"))


data_rows = [["operator", "measured at", "x (mm)", "y (mm)", "twice x (mm)"]]
for i, (a, b, _) in enumerate(BASE):
    op = "K. Ito" if i % 4 == 0 else None  # merged over four rows: only the first cell holds it
    data_rows.append([op, ("date", 46300 + i * 0.25), a, b, ("formula", f"C{i + 2}*2", round(2 * a, 2))])
merges = [f"A{r}:A{r + 3}" for r in range(2, 2 + len(BASE), 4)]
xlsx("hostile.xlsx", [("Empty", [], ()), ("Data", data_rows, merges)])
