"""Workbook exports for the workbook reader's tests (`tests/cli_workbook.rs`).

Writes, under tests/reference/workbooks/, two invented logger exports saved as
spreadsheets by general-purpose libraries (openpyxl for .xlsx, odfpy for .ods),
and beside each the same readings as a plain CSV export, which the tests read
with a hand-written block and compare with the workbook's readings:

* bench_a.xlsx: sheet "Readings" (a title row, a blank row, then Time,
  Temp (°C), RH (%); spreadsheet date cells at 10-minute steps over two days,
  across no daylight-saving change; one #N/A error cell; one empty humidity
  cell), and a second sheet "Notes" with text.
* bench_b.ods: one sheet with separate date and time cells (office date and
  time values), temperature in °F and humidity as a fraction.
  The readings are invented (a smooth daily cycle); nothing is copied from any
  product's files.

Regenerate: python3 -m venv .venv && .venv/bin/pip install openpyxl odfpy
            .venv/bin/python tests/reference/workbooks.py
"""
import csv
import datetime as dt
import math
import os

import openpyxl
from odf.opendocument import OpenDocumentSpreadsheet
from odf.table import Table, TableCell, TableRow
from odf.text import P

HERE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "workbooks")
START = dt.datetime(2026, 10, 5, 0, 0)
STEPS = 288


def temp_c(i, phase):
    return round(14.0 + 5.0 * math.sin(2 * math.pi * (i / 144.0) + phase), 2)


def rh_pct(i):
    return round(70.0 - 12.0 * math.sin(2 * math.pi * (i / 144.0)), 1)


def bench_a():
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Readings"
    ws.append(["Logger A7 export, compartment 3"])
    ws.append([])
    ws.append(["Time", "Temp (°C)", "RH (%)"])
    rows = []
    for i in range(STEPS):
        t = START + dt.timedelta(minutes=10 * i)
        temp = temp_c(i, 0.0)
        rh = rh_pct(i)
        cells = [t, temp, rh]
        if i == 40:
            cells[1] = "#N/A"  # an error cell: written as an error value
        if i == 41:
            cells[2] = None  # an empty cell
        ws.append(cells)
        ws.cell(row=ws.max_row, column=1).number_format = "yyyy-mm-dd hh:mm"
        rows.append(cells)
    notes = wb.create_sheet("Notes")
    notes.append(["Calibrated 2026-09-30 against a reference thermometer"])
    wb.save(os.path.join(HERE, "bench_a.xlsx"))
    with open(os.path.join(HERE, "bench_a.csv"), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["Time", "Temp (°C)", "RH (%)"])
        for t, temp, rh in rows:
            w.writerow([t.strftime("%Y-%m-%d %H:%M:%S"), temp, "" if rh is None else rh])


def cell(value_type, **attrs):
    c = TableCell(valuetype=value_type, **attrs)
    return c


def bench_b():
    doc = OpenDocumentSpreadsheet()
    table = Table(name="Logger B2")
    header = TableRow()
    for h in ["Date", "Time", "Temperature (°F)", "Humidity"]:
        c = TableCell(valuetype="string")
        c.addElement(P(text=h))
        header.addElement(c)
    table.addElement(header)
    rows = []
    for i in range(STEPS):
        t = START + dt.timedelta(minutes=10 * i)
        temp_f = round(temp_c(i, 1.0) * 9 / 5 + 32, 2)
        rh = round(rh_pct(i) / 100.0, 3)
        r = TableRow()
        d = TableCell(valuetype="date", datevalue=t.strftime("%Y-%m-%d"))
        d.addElement(P(text=t.strftime("%d.%m.%Y")))
        r.addElement(d)
        h = TableCell(valuetype="time", timevalue=t.strftime("PT%HH%MM%SS"))
        h.addElement(P(text=t.strftime("%H:%M")))
        r.addElement(h)
        for v in (temp_f, rh):
            c = TableCell(valuetype="float", value=str(v))
            c.addElement(P(text=str(v)))
            r.addElement(c)
        table.addElement(r)
        rows.append((t, temp_f, rh))
    doc.spreadsheet.addElement(table)
    doc.save(os.path.join(HERE, "bench_b.ods"))
    with open(os.path.join(HERE, "bench_b.csv"), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["Date", "Time", "Temperature (°F)", "Humidity"])
        for t, temp_f, rh in rows:
            w.writerow([t.strftime("%Y-%m-%d"), t.strftime("%H:%M:%S"), temp_f, rh])


if __name__ == "__main__":
    os.makedirs(HERE, exist_ok=True)
    bench_a()
    bench_b()
