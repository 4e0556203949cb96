"""Write the reader's test corpus: small messy and broken files, all invented.

Run ``python tests/corpus/make_corpus.py`` to (re)write the files next to this script. Every
file is written byte for byte (fixed encodings, line endings, zip timestamps), so a rerun
gives identical files. tests/test_reader.py holds what each file must read as.
"""

from __future__ import annotations

import io
import random
import re
import zipfile
from datetime import date, datetime
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
FIXED_TIME = datetime(2024, 1, 1, 0, 0, 0)
LONG_NAME = "very long column name " * 13 + "x" * 14  # 300 characters
assert len(LONG_NAME) == 300

# Invented frame for the twin files: the same numbers written two ways.
TWIN_SEED = 20240611
TWIN_ROWS = 60


def twin_frame() -> pd.DataFrame:
    """Invented data with accented names, values above 1,000 and a text category."""
    rng = np.random.default_rng(TWIN_SEED)
    quantity = rng.integers(1, 40, TWIN_ROWS)
    price = np.round(rng.uniform(800.0, 4800.0, TWIN_ROWS), 2)
    region = rng.choice(["Île", "Côte", "Forêt"], TWIN_ROWS)
    effect = {"Île": 0.0, "Côte": 0.15, "Forêt": -0.1}
    log_sales = (
        2.0 + 0.6 * np.log(price) + 0.02 * quantity + np.array([effect[r] for r in region]) + rng.normal(0, 0.2, TWIN_ROWS)
    )
    return pd.DataFrame(
        {
            "ventes_€": np.round(np.exp(log_sales), 2),
            "prix_unitaire": price,
            "quantité": quantity,
            "région": region,
        }
    )


def _decimal_comma(value: float) -> str:
    """1234.5 -> '1.234,50': dots group thousands, the comma marks decimals."""
    whole, fraction = f"{value:,.2f}".split(".")
    return whole.replace(",", ".") + "," + fraction


def twin_texts() -> tuple[bytes, bytes]:
    """The twin frame as clean UTF-8 CSV and as Windows-1252, semicolons and decimal commas."""
    frame = twin_frame()
    clean = frame.to_csv(index=False, lineterminator="\n", float_format="%.2f").encode("utf-8")
    lines = [";".join(frame.columns)]
    for row in frame.itertuples(index=False):
        lines.append(";".join([_decimal_comma(row[0]), _decimal_comma(row[1]), str(row[2]), row[3]]))
    messy = ("\r\n".join(lines) + "\r\n").encode("cp1252")
    return clean, messy


def _stable_zip(data: bytes) -> bytes:
    """Rewrite a zip (xlsx) with fixed timestamps so reruns give identical bytes."""
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as source, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            fixed = zipfile.ZipInfo(info.filename, date_time=FIXED_TIME.timetuple()[:6])
            fixed.compress_type = zipfile.ZIP_DEFLATED
            data = source.read(info.filename)
            if info.filename == "docProps/core.xml":
                # openpyxl stamps the save time as "modified"; pin it.
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>2024-01-01T00:00:00Z", data)
            target.writestr(fixed, data)
    return out.getvalue()


def two_sheet_workbook() -> bytes:
    from openpyxl import Workbook

    book = Workbook()
    book.properties.created = FIXED_TIME
    book.properties.modified = FIXED_TIME
    sales = book.active
    sales.title = "Sales"
    sales.append(["store", "revenue", "list_price", "opened", "visits"])
    rows = [
        ("North", 1200.5, "$1,299.00", date(2020, 3, 1), 410),
        ("South", 980.25, "$899.50", date(2019, 7, 15), 388),
        ("East", 1500.0, "$2,100.00", date(2021, 1, 4), "NA"),
        ("West", 1110.75, "($50.00)", date(2018, 11, 30), 502),
    ]
    for row in rows:
        sales.append(list(row))
    costs = book.create_sheet("Costs")
    costs.append(["Cost report 2024 (invented)"])
    costs.append([])
    costs.append(["item", "cost", "share"])
    for item, cost, share in [("rent", 2500, 0.5), ("staff", 1500, 0.3), ("goods", 1000, 0.2)]:
        costs.append([item, cost, share])
    buffer = io.BytesIO()
    book.save(buffer)
    return _stable_zip(buffer.getvalue())


def files() -> dict[str, bytes]:
    """Every corpus file, name -> exact bytes."""
    out: dict[str, bytes] = {}
    out["semicolon_comma_cp1252.csv"] = (
        "Région;Prix (€);Quantité;Remise;Note\r\n"
        "Île-de-France;1.234,50;12;5,5 %;très bien\r\n"
        "Rhône-Alpes;987,25;7;10 %;café\r\n"
        "Provence;12,00;0;0 %;déjà vu\r\n"
        "Bretagne;2.500,75;3;2,5 %;crêpe\r\n"
    ).encode("cp1252")
    out["utf8_bom.csv"] = "\ufeffname,value\nalpha,1.5\nbeta,2.5\ngamma,3.5\n".encode()
    out["tabs.tsv"] = (
        b"city\tpopulation\tarea_km2\nSpringfield, IL\t114,394\t158.1\nShelbyville\t52,012\t61.9\nOgdenville\t9,870\t12.4\n"
    )
    out["currency_dollar.csv"] = (
        b'item,price,profit,fee\nA,"$1,234.50","(1,000)",$5\nB,$980.00,"$2,000.00",$7.25\n'
        b'C,"$12,345.67","($250.00)",-$3\nD,$0.99,$10.00,$0\n'
    )
    out["currency_euro.csv"] = (
        "produkt;pris;belopp\na;€1.234,50;1 234,50 kr\nb;€99,95;12\u00a0000,00 kr\nc;€0,50;-150,25 kr\n".encode()
    )
    out["percent.csv"] = b"store,growth,margin\na,12 %,12%\nb,7.5 %,-3%\nc,0 %,100%\n"
    markers = ["", "NA", "N/A", "n/a", "#N/A", "null", "None", "-", ".", "?", "missing"]
    lines = ["id,x,label"]
    for i, marker in enumerate(markers):
        lines.append(f"{2 * i + 1},{i + 0.5},a{i}")
        lines.append(f"{2 * i + 2},{marker},{marker or 'b'}")
    out["missing_markers.csv"] = ("\n".join(lines) + "\n").encode()
    out["headers_dup_blank.csv"] = b"price,price,,qty, ,price\n1,2,3,4,5,6\n7,8,9,10,11,12\n13,14,15,16,17,18\n"
    out["two_sheets.xlsx"] = two_sheet_workbook()
    out["corrupt.xlsx"] = out["two_sheets.xlsx"][: len(out["two_sheets.xlsx"]) * 3 // 5]
    out["csv_renamed.xlsx"] = b"a,b\n1,2\n3,4\n"
    out["empty.csv"] = b""
    out["whitespace_only.csv"] = b"  \n\n \t\n"
    out["header_only.csv"] = b"price,quantity,region\n"
    out["garbage.csv"] = random.Random(7).randbytes(2048)
    out["page.csv"] = (
        b"<!DOCTYPE html>\n<html><head><title>Sales</title></head>\n<body><table>\n"
        b"<tr><th>a</th><th>b</th></tr>\n<tr><td>1</td><td>2</td></tr>\n</table></body></html>\n"
    )
    out["single_row.csv"] = b"price,quantity\n4.5,100\n"
    out["wide_501.csv"] = (
        ",".join(f"c{j}" for j in range(1, 502))
        + "\n"
        + "\n".join(",".join(str(i * j) for j in range(1, 502)) for i in range(1, 4))
        + "\n"
    ).encode()
    values = ["1.5", "2", "3.25", "abc", "4", "5.5", "6", "7", "n.v.", "10"]
    out["mixed.csv"] = ("id,x\n" + "".join(f"{i},{v}\n" for i, v in enumerate(values, start=1))).encode()
    out["infinities.csv"] = b"x,y\n1,inf\n2,-inf\n3,5.5\n4,Infinity\n5,2\n"
    names = ["Umsatz (€) – netto", "  spaced   name  ", "名前", LONG_NAME, "rocket 🚀", '"line\nbreak"', "a,b"]
    header = ",".join(n if n.startswith('"') else (f'"{n}"' if "," in n else n) for n in names)
    out["odd_names.csv"] = (
        header + "\n" + "\n".join(",".join(str(i + j) for j in range(len(names))) for i in range(4)) + "\n"
    ).encode()
    out["sep_hint.csv"] = b"sep=;\na;b\n1,5;2\n3;4\n"
    out["title_line.csv"] = b"Weekly sales report (invented)\n\nweek,sales\n1,100\n2,200\n3,150\n"
    out["utf16.txt"] = "name\tvalue\nÅsa\t1,5\nBjörn\t2,25\nÇelik\t3\n".encode("utf-16")
    out["ragged.csv"] = b"a,b,c\n1,2,3\n4,5,6\n7,8,9,10\n"
    out["trailing_delimiters.csv"] = b"a;b;\n1;2;\n3;4;\n5;6;\n"
    out["dates.csv"] = (
        b"iso,dmy,mdy,value\n2024-01-31,31/01/2024,01/31/2024,1\n2024-02-29,29/02/2024,02/29/2024,2\n2024-03-15,15/03/2024,03/15/2024,3\n"
    )
    clean, messy = twin_texts()
    out["twin_clean.csv"] = clean
    out["twin_semicolon_cp1252.csv"] = messy
    return out


def main() -> None:
    for name, data in files().items():
        (HERE / name).write_bytes(data)
    print(f"wrote {len(files())} files to {HERE}")


if __name__ == "__main__":
    main()
