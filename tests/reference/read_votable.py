"""Read massline's VOTables with astropy and check them against what the test expects.

Usage: python3 read_votable.py EXPECTED.json

EXPECTED.json is a list of {"file": path, "rows": n, "fields": [{"name", "unit", "ucd"}]},
written by tests/app/exports.rs from massline's own column lists: the names in order, each
field's unit in VOUnit ("" for none) and UCD, and the number of rows.

Every warning is an error: astropy must read each file without a complaint (verify="exception"
turns the VOTable parser's own warnings, such as W50 "Invalid unit string", into exceptions).
Each unit must be one astropy's VOUnit reader knows, each UCD must be made of UCD1+ words
(astropy's bundled controlled vocabulary). Exits non-zero with a message on the first mismatch.
"""

import json
import sys
import warnings

from astropy import units as u
from astropy.io.votable import parse
from astropy.io.votable.ucd import check_ucd


def fail(message):
    print(f"FAIL: {message}", file=sys.stderr)
    sys.exit(1)


def check(expected):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        votable = parse(expected["file"], verify="exception")
        if votable.version != "1.4":
            fail(f"{expected['file']}: version {votable.version}, not 1.4")
        table = votable.get_first_table()
        names = [f.name for f in table.fields]
        want = [f["name"] for f in expected["fields"]]
        if names != want:
            fail(f"{expected['file']}: columns {names}, expected {want}")
        for field, want in zip(table.fields, expected["fields"]):
            if want["unit"]:
                if field.unit is None or isinstance(field.unit, u.UnrecognizedUnit):
                    fail(f"{field.name}: unit {field.unit!r} not read as a unit")
                wanted = u.Unit(want["unit"], format="vounit", parse_strict="silent")
                if field.unit != wanted:
                    fail(f"{field.name}: unit {field.unit!r}, expected {wanted!r}")
            elif field.unit is not None:
                fail(f"{field.name}: unexpected unit {field.unit!r}")
            if field.ucd != want["ucd"]:
                fail(f"{field.name}: UCD {field.ucd!r}, expected {want['ucd']!r}")
            if not check_ucd(field.ucd, check_controlled_vocabulary=True, has_colon=False):
                fail(f"{field.name}: UCD {field.ucd!r} is not made of UCD1+ words")
        rows = len(table.array)
        if rows != expected["rows"]:
            fail(f"{expected['file']}: {rows} rows, expected {expected['rows']}")
    print(f"{expected['file']}: {len(names)} columns, {rows} rows, units and UCDs read")


def main():
    with open(sys.argv[1], encoding="utf-8") as f:
        for expected in json.load(f):
            check(expected)


if __name__ == "__main__":
    main()
