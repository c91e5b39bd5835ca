"""``optmatch schema``: the JSON Schema of a study file, generated from the validation models.

The general-purpose ``jsonschema`` package (draft 2020-12) is the independent validator: every
shipped config must pass it, and on a set of broken files the schema and the loader must agree.
"""

from __future__ import annotations

import functools
import json
import textwrap
from pathlib import Path

import jsonschema
import pytest
import yaml

from optmatch.cli.main import main
from optmatch.cli.schema import schema_text
from optmatch.studyfile.loader import check_study

ROOT = Path(__file__).parent.parent
CONFIGS = sorted((ROOT / "configs").rglob("*.yaml"))
COMMITTED = ROOT / "configs" / "study.schema.json"


@functools.cache
def validator() -> jsonschema.Draft202012Validator:
    schema = json.loads(schema_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


def test_committed_schema_is_the_commands_output(capsys):
    assert main(["schema"]) == 0
    printed = capsys.readouterr().out
    assert printed == schema_text()
    assert COMMITTED.read_text(encoding="utf-8") == printed, "run: optmatch schema > configs/study.schema.json"


@pytest.mark.parametrize("path", CONFIGS, ids=lambda p: p.name)
def test_shipped_configs_validate_and_point_at_the_schema(path):
    text = path.read_text(encoding="utf-8")
    first = text.splitlines()[0]
    assert first.startswith("# yaml-language-server: $schema=")
    assert (path.parent / first.split("$schema=", 1)[1]).resolve() == COMMITTED.resolve()
    errors = list(validator().iter_errors(yaml.safe_load(text)))
    assert errors == [], [e.message for e in errors]
    assert check_study(path) == []


GOOD = """\
load: {impedance: 60-j80}
mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 15}]}
network: {template: double_stub}
"""


@pytest.mark.parametrize(
    "text",
    [
        GOOD,
        GOOD.replace("return_loss: 15", "vswr: 1.5"),
        GOOD + "search: {trials: 3, time: 5min, seed: 2}\ntolerance: {cut: 1mm, z0: 2%, samples: 100}\n",
        GOOD.replace("network: {template: double_stub}",
                     "network:\n  elements:\n    - line: {length: {min: 0deg, max: 180deg}, cable: RG-58-class}\n"
                     "    - lumped: {connection: shunt, part: c, value: {min: 1pF, max: 10pF}}"),
        GOOD + "drive: {power: 50dBm}\nsystem: 50 ohm\nreference: 435 MHz\n",
    ],
)
def test_schema_and_loader_accept_good_files(tmp_path, text):
    path = tmp_path / "good.yaml"
    path.write_text(text, encoding="utf-8")
    assert list(validator().iter_errors(yaml.safe_load(text))) == []
    assert check_study(path) == []


BROKEN = [
    GOOD + "laod: {impedance: 50}\n",  # unknown key
    GOOD.replace("420MHz", "420"),  # bare frequency
    GOOD.replace("420MHz", "420mhz"),  # lower-case unit
    GOOD.replace("420MHz", "420mHz"),  # millihertz
    GOOD.replace("load: {impedance: 60-j80}\n", ""),  # no load
    GOOD.replace("{impedance: 60-j80}", "{impedance: 50, series_rlc: {r: 20}}"),  # two load kinds
    GOOD.replace("{impedance: 60-j80}", "{series_rlc: {r: 20, l: 90}}"),  # bare inductance
    GOOD.replace("return_loss: 15", "return_loss: 15, vswr: 1.5"),  # both forms
    GOOD.replace(", return_loss: 15", ""),  # neither form
    GOOD.replace("vswr", "x").replace("return_loss: 15", "vswr: 1"),  # VSWR of 1
    GOOD.replace("{template: double_stub}", "{template: double_stub, elements: [line: {length: 1deg}]}"),
    GOOD.replace("{template: double_stub}", "{elements: [shunt_stub: {length: 10deg, end: opne}]}"),
    GOOD.replace("{template: double_stub}", "{elements: [line: {length: 30}]}"),  # bare length
    GOOD.replace("{template: double_stub}", "{elements: [{line: {length: 1deg}, lumped: {}}]}"),
    GOOD + "name: '..'\n",
    GOOD + "name: 'a/b'\n",
    GOOD + f"name: {'n' * 101}\n",
    GOOD + "search: {population: lots}\n",
    GOOD + "search: {trials: 0}\n",
    GOOD + "search: {seed: -1}\n",
    GOOD + "search: {time: 90}\n",  # bare duration
    GOOD + "tolerance: {z0: 2}\n",  # bare percentage
    GOOD + "drive: {power: 100}\n",  # bare power
    "- just\n- a list\n",
]


@pytest.mark.parametrize("text", BROKEN)
def test_schema_and_loader_refuse_the_same_broken_files(tmp_path, text):
    path = tmp_path / "broken.yaml"
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    schema_errors = list(validator().iter_errors(yaml.safe_load(text)))
    assert schema_errors, "the schema accepts a file the loader refuses"
    assert check_study(path), "the loader accepts a file the schema refuses"
