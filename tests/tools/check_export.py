#!/usr/bin/python3
"""check_export -- reference check of tachist's exported tables against the database itself.

    check_export.py DB csv|tsv|json FILE [SUBJECT]

Reads the trials straight from SQLite with Python's sqlite3 module, parses FILE with Python's csv
module (RFC 4180 dialect: csv.reader with default quoting) or json module, and compares every cell.
Text cells may carry the OWASP CSV-injection guard (a leading apostrophe before = + - @ tab CR),
which is undone before comparing; numbers must read back as the same double. Prints one line per
problem and exits 1 on any, else prints "ok N rows".
"""
import csv
import json
import sqlite3
import sys

STD_HEAD = ["session_id", "subject", "block", "block_trial", "trial", "image", "category",
            "level", "source"]
STD_TAIL = ["response_key", "response", "correct", "rt_ms", "timed_out", "frames_planned",
            "frames_actual", "dropped_frames", "timing_ok", "onset_ns", "staircase"]
TEXT = {"session_id", "subject", "image", "category", "source", "response_key", "response"}


def db_rows(path, subject):
    con = sqlite3.connect(path)
    sessions = con.execute(
        "SELECT id, subject, label_names FROM sessions WHERE ?1 IS NULL OR subject = ?1"
        " ORDER BY started_utc, id", (subject,)).fetchall()
    names = []
    for _, _, ln in sessions:
        for n in json.loads(ln or "[]"):
            if n not in names:
                names.append(n)
    rows = []
    for sid, subj, ln in sessions:
        own = json.loads(ln or "[]")
        for r in con.execute(
                "SELECT block, block_trial, trial, image, category, level, source, labels,"
                " response_key, response_category, correct, rt_ms, timed_out, frames_planned,"
                " frames_actual, dropped_frames, timing_ok, onset_ns, staircase"
                " FROM trials WHERE session_id = ? ORDER BY trial", (sid,)):
            vals = dict(zip(own, json.loads(r[7] or "[]")))
            row = {"session_id": sid, "subject": subj, "block": r[0], "block_trial": r[1],
                   "trial": r[2], "image": r[3], "category": r[4], "level": r[5],
                   "source": r[6], "response_key": r[8], "response": r[9], "correct": r[10],
                   "rt_ms": r[11], "timed_out": r[12], "frames_planned": r[13],
                   "frames_actual": r[14], "dropped_frames": r[15], "timing_ok": r[16],
                   "onset_ns": r[17], "staircase": r[18]}
            for n in names:
                row["label:" + n] = vals.get(n)
            rows.append(row)
    return names, rows


def unguard(s):
    if len(s) >= 2 and s[0] == "'" and s[1] in "=+-@\t\r":
        return s[1:]
    return s


def same(col, cell, want, problems, where):
    if col in TEXT or col.startswith("label:"):
        got = unguard(cell) if isinstance(cell, str) else cell
        exp = "" if want is None and isinstance(cell, str) else want
        if got != exp:
            problems.append(f"{where} {col}: got {cell!r}, want {want!r}")
        return
    if want is None:
        if cell not in ("", None):
            problems.append(f"{where} {col}: got {cell!r}, want empty")
        return
    if isinstance(cell, str):
        if isinstance(want, int) and cell != str(want):
            problems.append(f"{where} {col}: got {cell!r}, want {want}")
        elif float(cell) != float(want):
            problems.append(f"{where} {col}: got {cell!r}, want {want!r}")
    elif cell != want:
        problems.append(f"{where} {col}: got {cell!r}, want {want!r}")


def main():
    db, fmt, path = sys.argv[1:4]
    subject = sys.argv[4] if len(sys.argv) > 4 else None
    names, rows = db_rows(db, subject)
    cols = STD_HEAD + ["label:" + n for n in names] + STD_TAIL
    problems = []
    if fmt in ("csv", "tsv"):
        with open(path, newline="", encoding="utf-8") as f:
            table = list(csv.reader(f, delimiter="," if fmt == "csv" else "\t"))
        header = STD_HEAD + names + STD_TAIL
        if table[0] != header:
            problems.append(f"header {table[0]} != {header}")
        body = table[1:]
        if len(body) != len(rows):
            problems.append(f"{len(body)} rows, database has {len(rows)}")
        for i, (cells, want) in enumerate(zip(body, rows)):
            for col, cell in zip(cols, cells):
                same(col, cell, want[col], problems, f"row {i + 1}")
    else:
        with open(path, encoding="utf-8") as f:
            doc = json.load(f)
        if len(doc) != len(rows):
            problems.append(f"{len(doc)} rows, database has {len(rows)}")
        for i, (obj, want) in enumerate(zip(doc, rows)):
            keys = STD_HEAD + names + STD_TAIL
            if list(obj.keys()) != keys:
                problems.append(f"row {i}: keys {list(obj.keys())}")
            for col in cols:
                key = col[6:] if col.startswith("label:") else col
                same(col, obj.get(key), want[col], problems, f"row {i}")
    for p in problems[:20]:
        print(p)
    if problems:
        sys.exit(1)
    print(f"ok {len(rows)} rows")


main()
