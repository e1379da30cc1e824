"""Commands of this group (to be filled in)."""
import click


def register(cli: click.Group) -> None:
    pass
