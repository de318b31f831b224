"""The ``congest`` command line: thin wrappers that parse, call the library, format.

Each command lives in its own module ``congest.cli.<name>`` exposing a click command
called ``command``; this group finds them lazily so ``congest --help`` stays fast.
"""

from __future__ import annotations

import importlib
import importlib.util

import click

from .. import __version__

#: command name -> module under congest.cli
COMMANDS = {
    "solve": "solve",
    "compare": "compare",
    "toll": "toll",
    "learn": "learn",
    "sweep": "sweep",
    "generate": "generate",
    "plot": "plot",
    "report": "report",
    "inspect": "inspect",
}


class _LazyGroup(click.Group):
    def _available(self):
        return {name: mod for name, mod in COMMANDS.items()
                if importlib.util.find_spec(f"{__name__}.{mod}") is not None}

    def list_commands(self, ctx):
        return sorted(self._available())

    def get_command(self, ctx, name):
        mod = self._available().get(name)
        if mod is None:
            return None
        return importlib.import_module(f"{__name__}.{mod}").command


@click.group(cls=_LazyGroup)
@click.version_option(__version__, prog_name="congest")
def main():
    """congest: congestion on road networks.

    Wardrop user equilibrium and system optimum, the price of anarchy, tolls, routing
    advice, day-to-day learning and demand sweeps. Results are planning-level
    estimates, not for operational control or safety design.
    """
