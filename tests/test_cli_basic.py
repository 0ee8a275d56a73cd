"""The command line: every subcommand has --help with an example; errors become exit status 2."""

import argparse

import pytest

from matgen.cli import COMMAND_MODULES, build_parser, main


def _subcommands():
    parser = build_parser()
    action = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    return action.choices


def test_top_level_help(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["--help"])
    assert exc.value.code == 0
    assert "imagery only" in capsys.readouterr().out


@pytest.mark.parametrize("name", list(_subcommands()))
def test_each_subcommand_has_help_with_example(name, capsys):
    with pytest.raises(SystemExit) as exc:
        main([name, "--help"])
    assert exc.value.code == 0
    out = capsys.readouterr().out
    assert "example:" in out and f"matgen {name}" in out


def test_registered_commands_are_known():
    assert set(_subcommands()) <= set(COMMAND_MODULES)


def test_help_names_each_default_once():
    """No option's help shows its default twice (a written '(default: ...)' and the formatter's)."""
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    checked = 0
    for name, p in sub.choices.items():
        fmt = p._get_formatter()
        for action in p._actions:
            if action.help:
                assert fmt._get_help_string(action).count("(default:") <= 1, (name, action.dest)
                checked += 1
    assert checked > 50
