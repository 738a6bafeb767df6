"""`pqcheck plan new PATH`: write a commented test-plan template."""

from __future__ import annotations

import click

from ._common import EXIT_OK, handle_errors, main, output_option, template_target


@main.group("plan")
def plan_group():
    """Test plans: one TOML file that lists the site, the equipment, the instrument chain,
    the captures with their load points and the limit tables (see `pqcheck report`)."""


@plan_group.command("new")
@click.argument("path", required=False, type=click.Path(dir_okay=False))
@output_option("PATH", help="The template to write (or give PATH as the argument).")
@click.option("--force", is_flag=True, help="Replace an existing file.")
@handle_errors
def plan_new_cmd(path, output, force):
    """Write a commented test-plan template to PATH (refuses to replace an existing file
    unless --force). Edit it, then run `pqcheck report PATH -o report.pdf`."""
    from ..files.atomic import write_atomic

    path = template_target(path, output)
    from ..run.plan import plan_template

    write_atomic(path, plan_template(), force=force)
    click.echo(f"wrote {path}: fill in the site, equipment, instruments, captures and limit "
               "tables, then run: pqcheck report " + click.format_filename(path)
               + " -o report.pdf")
    raise click.exceptions.Exit(EXIT_OK)
