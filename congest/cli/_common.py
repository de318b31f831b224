"""Shared pieces of the CLI: error mapping and result formatting."""

from __future__ import annotations

import functools
import sys
import warnings

import click

from ..exceptions import CongestError, ConvergenceWarning


def friendly_errors(func):
    """Turn congest's errors into a one-line message and exit code 1 (no traceback)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ConvergenceWarning)
                return func(*args, **kwargs)
        except CongestError as err:
            click.echo(f"error: {err}", err=True)
            sys.exit(1)
        except (FileNotFoundError, PermissionError, IsADirectoryError) as err:
            click.echo(f"error: {err}", err=True)
            sys.exit(1)

    return wrapper
