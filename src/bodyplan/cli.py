"""The bodyplan command line: a thin shell over the library.

Commands load lazily (name → module), so `bodyplan params` never imports the site, the ingest or
plotting code, and every command shares one output-format option and one error path: a
``BodyplanError`` (the user's input) is one clean line; anything else is a bug, shown as an
internal error with the --debug hint.
"""

from __future__ import annotations

import importlib
import sys

import click

COMMANDS = {  # command name → "module:function" under bodyplan.commands
    "check": "store_commands:check_cmd",
    "build": "store_commands:build_cmd",
    "info": "store_commands:info_cmd",
    "values": "values:values_cmd",
    "params": "params:params_cmd",
    "gaps": "gaps:gaps_cmd",
    "allometry": "gaps:allometry_cmd",
    "serve": "site:serve_cmd",
    "site": "site:site_cmd",
    "add": "curation:add_cmd",
    "lint": "curation:lint_cmd",
    "trace": "curation:trace_cmd",
    "diff": "curation:diff_cmd",
    "export": "curation:export_cmd",
    "kp": "partition:kp_cmd",
    "population": "population:population_cmd",
}


class LazyGroup(click.Group):
    def list_commands(self, ctx):
        return sorted(COMMANDS)

    def get_command(self, ctx, name):
        target = COMMANDS.get(name)
        if target is None:
            return None
        module, attr = target.split(":")
        return getattr(importlib.import_module(f"bodyplan.commands.{module}"), attr)


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="bodyplan")
@click.option("--debug", is_flag=True, help="Show full tracebacks on errors.")
@click.pass_context
def cli(ctx, debug):
    """Curated species physiology for PBPK models: every value with its source, unit and gaps."""
    ctx.ensure_object(dict)["debug"] = debug


def _usage_line(exc: click.UsageError) -> str:
    """A click usage error as one line: the problem, then where the valid usage is."""
    message = " ".join(exc.format_message().split())
    command = exc.ctx.command_path if exc.ctx is not None else "bodyplan"
    return f"error: {message} (see '{command} --help')"


def main(argv=None) -> None:
    from .errors import BodyplanError

    debug = "--debug" in (argv if argv is not None else sys.argv[1:])
    try:
        cli.main(args=argv, prog_name="bodyplan", standalone_mode=False)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except click.UsageError as exc:
        if debug:
            raise
        click.echo(_usage_line(exc), err=True)
        sys.exit(exc.exit_code)
    except click.ClickException as exc:
        if debug:
            raise
        click.echo(f"error: {' '.join(exc.format_message().split())}", err=True)
        sys.exit(exc.exit_code)
    except click.exceptions.Abort:
        click.echo("aborted", err=True)
        sys.exit(1)
    except BodyplanError as exc:
        if debug:
            raise
        click.echo(f"error: {exc}", err=True)
        sys.exit(1)
    except OSError as exc:  # a file the user named cannot be read or written: not a bodyplan bug
        if debug or exc.filename is None:
            if debug:
                raise
            _internal(exc)
        click.echo(f"error: {exc.filename}: {exc.strerror or exc}; check the path and its permissions", err=True)
        sys.exit(1)
    except Exception as exc:
        if debug:
            raise
        _internal(exc)


def _internal(exc: BaseException) -> None:
    click.echo(f"error: internal error (a bodyplan bug, please report it): {type(exc).__name__}: {exc}; "
               "run with --debug for the traceback", err=True)
    sys.exit(3)


def reference_markdown() -> str:
    """The command reference in DEVELOPERS.md, generated from the commands themselves (a test keeps
    the copy there current): every command, argument and option with its help text."""
    lines = []
    for name in sorted(COMMANDS):
        command = LazyGroup().get_command(None, name)
        arguments = " ".join(p.human_readable_name if p.required else f"[{p.human_readable_name}]"
                             for p in command.params if isinstance(p, click.Argument))
        lines += [f"**`bodyplan {name}{' ' + arguments if arguments else ''}`**: "
                  f"{(command.help or '').strip().splitlines()[0]}", ""]
        options = [p for p in command.params if isinstance(p, click.Option) and not p.hidden]
        if options:
            lines += ["| option | does |", "|---|---|"]
            for p in options:
                names = ", ".join(f"`{o}`" for o in p.opts + p.secondary_opts)
                extra = ""
                if isinstance(p.type, click.Choice):
                    extra += f" One of: {', '.join(map(str, p.type.choices))}."
                if p.show_default and p.default not in (None, False, ()):
                    extra += f" Default: {p.default}."
                lines.append(f"| {names} | {' '.join((p.help or '').split())}{extra} |")
            lines.append("")
    return "\n".join(lines)
