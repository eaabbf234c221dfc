"""The bodyplan command line: a thin shell over the library.

Commands load lazily (name → module), so `bodyplan params` never imports the site
or plotting code, and every command shares one output-format option and one error path.
"""

from __future__ import annotations

import importlib
import sys

import click

COMMANDS = {  # command name → "module:function" under bodyplan.commands
    "check": "curate:check_cmd",
    "build": "curate:build_cmd",
    "info": "curate:info_cmd",
    "values": "values:values_cmd",
    "params": "params:params_cmd",
    "gaps": "gaps:gaps_cmd",
    "allometry": "gaps:allometry_cmd",
    "serve": "site:serve_cmd",
    "site": "site:site_cmd",
    "add": "curator:add_cmd",
    "lint": "curator:lint_cmd",
    "trace": "curator:trace_cmd",
    "diff": "curator:diff_cmd",
    "export": "curator:export_cmd",
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


def _expected_errors() -> tuple[type[BaseException], ...]:
    from .errors import expected_errors

    return expected_errors()


def main(argv=None) -> None:
    debug = "--debug" in (argv if argv is not None else sys.argv[1:])
    try:
        cli.main(args=argv, standalone_mode=False)
    except click.exceptions.Exit as exc:
        sys.exit(exc.exit_code)
    except click.ClickException as exc:
        exc.show()
        sys.exit(exc.exit_code)
    except click.exceptions.Abort:
        click.echo("aborted", err=True)
        sys.exit(1)
    except Exception as exc:
        if debug or not isinstance(exc, _expected_errors()):
            if debug:
                raise
            click.echo(f"error: {type(exc).__name__}: {exc} (run with --debug for the traceback)", err=True)
            sys.exit(1)
        click.echo(f"error: {exc}", err=True)
        sys.exit(1)
