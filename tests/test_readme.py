"""README promises that must hold: the set-up commands, the test command CI runs, the examples."""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path

from posebridge import cli
from posebridge.cell import resolve_scene, validate_cell
from posebridge.robot.toml_format import parse_robot_toml

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _code_blocks(language: str) -> list[str]:
    return re.findall(r"```" + language + r"\n(.*?)```", README, flags=re.S)


def test_readme_starts_with_the_job_then_two_set_up_commands() -> None:
    body = README.split("\n", 1)[1].strip()
    first_paragraph = body.split("\n\n", 1)[0]
    for user in ("cell designers", "shift engineers", "reviewed with a client"):
        assert user in first_paragraph
    commands = [block.strip() for block in _code_blocks("")][:2]
    assert commands[0].endswith("posebridge serve")
    assert commands[1].endswith("pytest")
    assert "<!-- test command -->" in README.split(commands[1])[0].rsplit("```", 1)[0][-40:]


def test_readme_carries_the_safety_caution() -> None:
    text = " ".join(README.split())
    for phrase in ("not a safety function", "ISO 10218-2", "ISO 13855", "reduced speed"):
        assert phrase in text


def test_ci_runs_the_readme_test_command() -> None:
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert "<!-- test command -->" in ci
    assert 'bash -c "$test_command"' in ci


def test_readme_cell_example_is_a_valid_cell() -> None:
    (example,) = _code_blocks("json")
    scene = resolve_scene(validate_cell(json.loads(example)))
    assert scene.targets.names == ("pick",)


def test_readme_robot_example_parses() -> None:
    (example,) = _code_blocks("toml")
    tomllib.loads(example)  # valid TOML as printed
    robot = parse_robot_toml(example, "README.md")
    assert robot.joint_names == ("j1",)


def test_readme_lists_every_exit_code_of_the_command_line() -> None:
    listed = re.search(r"Exit codes: (.*?)\.\n", README)
    assert listed is not None
    documented = {int(code) for code in re.findall(r"(?:^|, )(\d) ", listed.group(1))}
    # our own contract: every exit code the CLI returns is documented
    assert documented == {cli.EXIT_OK, cli.EXIT_FINDINGS, cli.EXIT_BAD_INPUT, cli.EXIT_INTERNAL}


def _subcommands() -> dict[str, object]:
    import argparse

    parser = cli.build_parser()
    action = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return dict(action.choices)


def test_readme_command_list_matches_the_parser() -> None:
    block = next(b for b in _code_blocks("") if b.lstrip().startswith("posebridge robots"))
    commands = _subcommands()
    # deprecated spellings, the executor options, the robot chain options and --quiet (all
    # described in the text below the list) and -o|--output
    hidden = {"--all-turns", "--workers", "--scheduler", "--help", "--output"}
    hidden |= {"--from-link", "--to-link", "--mesh-folder", "--quiet"}
    for line in block.splitlines():
        words = line.split("#", 1)[0].split()
        if len(words) < 2 or words[0] != "posebridge":
            continue
        sub = commands[words[1]]
        options = {o: a for a in sub._actions for o in a.option_strings}  # type: ignore[attr-defined]
        # our own contract: every option the README shows exists, with the default it shows
        for match in re.finditer(r"\[(--[a-z-]+) ([0-9.]+)\]", line):
            default = options[match.group(1)].default
            shown_value = match.group(2)
            if isinstance(default, int | float):
                assert float(default) == float(shown_value), line
            else:
                assert str(default) == shown_value, line
        for option in re.findall(r"--[a-z-]+", line):
            assert option in options, (line, option)
    for name, sub in commands.items():
        shown = " ".join(
            line for line in block.splitlines() if line.startswith(f"posebridge {name} ")
        )
        for action in sub._actions:  # type: ignore[attr-defined]
            for option in action.option_strings:
                if option.startswith("--") and option not in hidden:
                    # our own contract: the command list shows every option of every command
                    assert option in shown, (name, option)
