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

STD_HEAD = ["session_id", "subject", "protocol", "started_utc", "block", "block_name",
            "practice", "block_trial", "trial", "image", "category", "level", "source"]
STD_TAIL = ["response_key", "response", "correct", "rt_ms", "rt_clock", "timed_out",
            "anticipation", "frames_planned", "frames_actual", "dropped_frames", "timing_ok",
            "onset_ns", "staircase", "repeat_of"]
TEXT = {"session_id", "subject", "protocol", "started_utc", "block_name", "image", "category",
        "source", "response_key", "response", "rt_clock"}
# Indices kept from 0 in the database and exported from 1 (docs/storage.md).
ONE_BASED = {"block", "block_trial", "trial", "repeat_of"}


def db_rows(path, subject):
    con = sqlite3.connect(path)
    sessions = con.execute(
        "SELECT id, subject, label_names, protocol_name, started_utc FROM sessions"
        " WHERE ?1 IS NULL OR subject = ?1 ORDER BY started_utc, id", (subject,)).fetchall()
    names = []
    for s in sessions:
        for n in json.loads(s[2] or "[]"):
            if n not in names:
                names.append(n)
    rows = []
    cols = [c for c in STD_HEAD + STD_TAIL if c not in ("session_id", "subject", "protocol",
                                                         "started_utc")]
    db_cols = ["response_category" if c == "response" else c for c in cols]
    for sid, subj, ln, proto, started in sessions:
        own = json.loads(ln or "[]")
        for r in con.execute("SELECT labels, " + ", ".join(db_cols) +
                             " FROM trials WHERE session_id = ? ORDER BY trial", (sid,)):
            vals = dict(zip(own, json.loads(r[0] or "[]")))
            row = {"session_id": sid, "subject": subj, "protocol": proto, "started_utc": started}
            for c, v in zip(cols, r[1:]):
                row[c] = v + 1 if c in ONE_BASED and v is not None else v
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
            top = json.load(f)
        doc = top["trials"]
        sessions = {s["session_id"]: s for s in top["sessions"]}
        if any(r["session_id"] not in sessions for r in rows):
            problems.append("a trial's session is missing from \"sessions\"")
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
