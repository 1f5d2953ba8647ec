"""Reads the CSV tables tallyfit writes, checking each header on the way (shared by the reference
checks; not a test itself, since tests/run-all runs tests/ref/test_*.py only).

A header must follow the convention of docs/tables.md: every column name snake_case ASCII
(^[a-z][a-z0-9_]*$), `population` first, and exactly the columns that docs/tables.md lists for a
file of that name, in that order. The list is read from the document itself, so the two cannot
drift apart unnoticed. Two rows of that list describe columns that depend on the run: the
parameter columns of `draws` (the names given in back-quotes, in that order) and the per-threshold
and per-decline groups of `populations` ("per threshold k: threshold_k, ..."), which repeat with
k = 1, 2, ... (at least once).
"""
import csv
import os
import re

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
DOC = os.path.join(ROOT, "docs", "tables.md")
NAME = re.compile(r"^[a-z][a-z0-9_]*$")


class TableError(AssertionError):
    pass


def _split_top(text, sep):
    """Splits at sep outside parentheses."""
    out, depth, cur = [], 0, ""
    for ch in text:
        depth += ch == "("
        depth -= ch == ")"
        if ch == sep and depth == 0:
            out.append(cur)
            cur = ""
        else:
            cur += ch
    out.append(cur)
    return [s.strip() for s in out if s.strip()]


def _columns(cell):
    """A docs/tables.md column list as items: ('col', name) or ('repeat', [names with the letter], letter)."""
    items = []
    for seg in _split_top(cell, ";"):
        m = re.fullmatch(r"per [a-z ]+ ([a-z]): (.*)", seg)
        if m:
            items.append(("repeat", [c.strip() for c in _split_top(m.group(2), ",")], m.group(1)))
            continue
        for tok in _split_top(seg, ","):
            if tok.startswith("one column per parameter"):
                items += [("col", n) for n in re.findall(r"`([a-z][a-z0-9_]*)`", tok)]
                continue
            name = re.sub(r"\s*\(.*\)\s*$", "", tok).strip("` ")
            if not NAME.match(name):
                raise TableError(f"{DOC}: cannot read the column {tok!r}")
            items.append(("col", name))
    return items


_DOC_CACHE = {}


def documented():
    """{file name without .csv: column items} from the table of docs/tables.md."""
    if not _DOC_CACHE:
        with open(DOC, encoding="utf-8") as f:
            text = f.read()
        part = text.split("## The tables", 1)[1].split("\n## ", 1)[0]
        for line in part.splitlines():
            m = re.match(r"\|\s*`([a-z][a-z-]*)`(?: \([a-z ]+\))?\s*\|[^|]*\|(.*)\|\s*$", line)
            if m:
                _DOC_CACHE[m.group(1)] = _columns(m.group(2))
    return _DOC_CACHE


def header_problem(header, table):
    """None if header is what docs/tables.md lists for table, else what is wrong."""
    bad = [h for h in header if not NAME.match(h)]
    if bad:
        return f"column names not snake_case: {bad}"
    if not header or header[0] != "population":
        return f"first column {header[:1]}, want population"
    spec = documented().get(table)
    if spec is None:
        return f"docs/tables.md has no table {table!r}"
    i = 0
    for item in spec:
        if item[0] == "col":
            if i >= len(header) or header[i] != item[1]:
                return f"column {i + 1} is {header[i] if i < len(header) else 'missing'}, docs/tables.md has {item[1]}"
            i += 1
        else:
            _, names, letter = item
            k = 0
            while True:
                want = [re.sub(rf"(?<![a-z]){letter}(?![a-z])", str(k + 1), n) for n in names]
                if header[i:i + len(want)] != want:
                    break
                i += len(want)
                k += 1
            if k == 0:
                return (f"columns from {i + 1} are {header[i:i + len(names)]}, docs/tables.md has {names} "
                        f"({letter} = 1, 2...)")
    if i != len(header):
        return f"extra columns {header[i:]} beyond docs/tables.md"
    return None


def read_lists(path, table=None):
    """The table at path as lists of text ([header, row, ...]), its header checked against the
    convention and against docs/tables.md for table (default: the file's name without .csv)."""
    table = table or os.path.splitext(os.path.basename(path))[0]
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    if not rows:
        raise TableError(f"{path}: empty file")
    problem = header_problem(rows[0], table)
    if problem:
        raise TableError(f"{path}: header {rows[0]}: {problem}")
    for n, r in enumerate(rows[1:], start=2):
        if len(r) != len(rows[0]):
            raise TableError(f"{path}, line {n}: {len(r)} fields, the header has {len(rows[0])}")
    return rows


def read(path, table=None):
    """The table at path as dicts by column name (header checked as in read_lists)."""
    rows = read_lists(path, table)
    return [dict(zip(rows[0], r)) for r in rows[1:]]
