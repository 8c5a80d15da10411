"""The documents stay in step with the code (issue 17 item 4).

* docs/commands.md is generated from the command-line parsers and must be current;
  every option carries a help text.
* Every ``--option`` that README.md, config/README.md or docs/*.md mention is an option of
  a ``qcorr`` command, or one of the other tools' options listed below (Snakemake, the
  repository's scripts), each with the tool it belongs to.
* Every ``qcorr <command>`` the documents mention exists.
* The systems-sheet columns documented in config/README.md are exactly the schema's, and so
  are the config.yaml keys.
"""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "scripts"))

import write_command_reference  # noqa: E402

from qcorr.cli import COMMAND_MODULES, build_parser  # noqa: E402

#: options of other tools that the documents mention (not qcorr's), with their tool
OTHER_TOOLS = {
    "--cores": "snakemake",
    "--config": "snakemake",
    "--directory": "snakemake",
    "--profile": "snakemake",
    "--report": "snakemake",
    "--set-resources": "snakemake",
    "--set-threads": "snakemake",
    "--tag": "snakedeploy deploy-workflow",
    "--jobs": "scripts/make_validation_data.py",
    "--help": "every command",
}
#: documents whose option mentions are checked; docs/robustness.md records bad command
#: lines on purpose (abbreviated and unknown options), docs/commands.md is generated
DOCUMENTS = [ROOT / "README.md", ROOT / "config" / "README.md",
             *(p for p in sorted((ROOT / "docs").glob("*.md")) if p.name not in ("robustness.md", "commands.md"))]


def _commands() -> dict[str, argparse.ArgumentParser]:
    parser = build_parser(None)
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return dict(action.choices)
    raise AssertionError("qcorr has no subcommands")


def _options() -> dict[str, list[argparse.Action]]:
    found: dict[str, list[argparse.Action]] = {}
    for sub in _commands().values():
        for action in sub._actions:
            for option in action.option_strings:
                if option.startswith("--") and option != "--help":
                    found.setdefault(option, []).append(action)
    return found


def test_command_reference_is_current():
    current = (ROOT / "docs" / "commands.md").read_text(encoding="utf-8")
    assert current == write_command_reference.reference_text(), (
        "docs/commands.md is out of date: run python scripts/write_command_reference.py")


def test_every_option_has_help_and_appears_in_the_reference():
    page = (ROOT / "docs" / "commands.md").read_text(encoding="utf-8")
    options = _options()
    assert len(options) > 40  # the parsers were really found
    for option, actions in options.items():
        for action in actions:
            assert action.help and action.help.strip(), f"{option} has no help text"
        assert f"`{option}`" in page, option


@pytest.mark.parametrize("document", DOCUMENTS, ids=lambda p: str(p.relative_to(ROOT)))
def test_documented_options_exist(document):
    text = document.read_text(encoding="utf-8")
    known = set(_options()) | set(OTHER_TOOLS)
    mentioned = set(re.findall(r"(?<![\w-])(--[a-z][a-z0-9-]+)", text))
    unknown = sorted(mentioned - known)
    assert not unknown, f"{document.relative_to(ROOT)} mentions options no command has: {unknown}"


@pytest.mark.parametrize("document", DOCUMENTS, ids=lambda p: str(p.relative_to(ROOT)))
def test_documented_commands_exist(document):
    text = document.read_text(encoding="utf-8")
    mentioned = set(re.findall(r"`qcorr ([a-z]+)\b", text))
    assert mentioned <= set(COMMAND_MODULES), sorted(mentioned - set(COMMAND_MODULES))
    assert set(_commands()) == set(COMMAND_MODULES)


def _documented_keys(section: str) -> set[str]:
    """The first-column names of the table under a '## ' heading of config/README.md."""
    text = (ROOT / "config" / "README.md").read_text(encoding="utf-8")
    part = text.split(f"## {section}", 1)[1].split("\n## ", 1)[0]
    return set(re.findall(r"^\| `([A-Za-z_.]+)` \|", part, re.M))


def test_sheet_columns_documented_both_ways():
    schema = yaml.safe_load((ROOT / "workflow" / "schemas" / "systems.schema.yaml").read_text())
    columns = set(schema["properties"])
    documented = _documented_keys("`config/systems.tsv`")
    assert len(columns) > 20
    assert columns - documented == set(), f"sheet columns not in config/README.md: {sorted(columns - documented)}"
    assert documented - columns == set(), f"config/README.md documents columns the schema lacks: {sorted(documented - columns)}"


def test_config_keys_documented_both_ways():
    schema = yaml.safe_load((ROOT / "workflow" / "schemas" / "config.schema.yaml").read_text())

    def leaves(node, prefix=""):
        for key, value in node.get("properties", {}).items():
            if value.get("type") == "object" and "properties" in value:
                yield from leaves(value, f"{prefix}{key}.")
            else:
                yield f"{prefix}{key}"

    keys = set(leaves(schema))
    documented = _documented_keys("`config/config.yaml`")
    assert {"systems", "spectrum.overlap"} <= keys
    assert keys == documented, (sorted(keys - documented), sorted(documented - keys))
