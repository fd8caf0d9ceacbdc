#!/usr/bin/env python3
"""Validates tailpack's JSON files against the shipped JSON Schemas (draft 2020-12) with the `jsonschema`
package, an implementation independent of the Rust code that generates the schemas.

    validate_json.py SCHEMA_DIR FILE...

Each FILE is checked against the schema named after it: results.json -> results.schema.json,
manifest.json -> manifest.schema.json, signoff.json -> signoff.schema.json, index.json ->
index.schema.json (a file whose name ends in `-results.json` etc. counts as that name). Prints one line per
file, `ok FILE` or `invalid FILE` followed by each error with its place in the document; exits 1 when any
file is invalid, 2 on a usage error, 3 when the `jsonschema` package is missing.
"""

import json
import os
import sys

try:
    from jsonschema import Draft202012Validator
    from jsonschema.exceptions import best_match
except ImportError:
    print("python package jsonschema is not installed", file=sys.stderr)
    sys.exit(3)

KINDS = ("results", "manifest", "signoff", "index")


def kind_of(path):
    name = os.path.basename(path)
    for kind in KINDS:
        if name == f"{kind}.json" or name.endswith(f"-{kind}.json"):
            return kind
    return None


def deepest(error):
    """The error inside an anyOf/oneOf that explains it best (else the error itself)."""
    while error.context:
        error = best_match(error.context)
    return error


def place(error):
    return "/" + "/".join(str(p) for p in error.absolute_path)


def main(argv):
    if len(argv) < 3:
        print(__doc__, file=sys.stderr)
        return 2
    schema_dir, files = argv[1], argv[2:]
    validators = {}
    for kind in KINDS:
        with open(os.path.join(schema_dir, f"{kind}.schema.json"), encoding="utf-8") as fh:
            schema = json.load(fh)
        Draft202012Validator.check_schema(schema)
        validators[kind] = Draft202012Validator(schema)
    bad = 0
    for path in files:
        kind = kind_of(path)
        if kind is None:
            print(f"no schema for {path}", file=sys.stderr)
            return 2
        with open(path, encoding="utf-8") as fh:
            doc = json.load(fh)
        errors = sorted(validators[kind].iter_errors(doc), key=lambda e: list(e.absolute_path))
        if errors:
            bad += 1
            print(f"invalid {path}")
            for e in errors[:20]:
                e = deepest(e)
                print(f"  at {place(e)}: {e.message[:300]}")
        else:
            print(f"ok {path}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
