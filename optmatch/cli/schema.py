"""``optmatch schema``: print the study file's JSON Schema, for editors that check YAML as you type."""

from __future__ import annotations

import argparse
import json


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("schema", help="print the study file's JSON Schema",
                       description="Print the JSON Schema of a study file (generated from the same models "
                                   "that validate it). Point a YAML-aware editor at it, e.g. with the line "
                                   "'# yaml-language-server: $schema=study.schema.json' at the top of a study "
                                   "file. The schema checks structure and units as you type; optmatch check "
                                   "also checks cable names, files and bounds.")
    p.set_defaults(handler=run_schema)


def schema_text() -> str:
    """The schema as printed: indented JSON with a final newline."""
    from optmatch.studyfile.schema import json_schema

    return json.dumps(json_schema(), indent=2, ensure_ascii=False) + "\n"


def run_schema(args: argparse.Namespace) -> int:
    print(schema_text(), end="")
    return 0
