"""The ``congest`` command line: thin wrappers that parse, call the library, format.

Each command lives in its own module ``congest.cli.<name>`` exposing a click command
called ``command``; this group finds them lazily so ``congest --help`` stays fast.
"""

from __future__ import annotations

import importlib
import importlib.util
import os
import sys

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


#: commands that solve equilibria (and so run the compiled kernels)
SOLVING = frozenset({"solve", "compare", "toll", "learn", "sweep", "plot", "report"})


def kernels_cached() -> bool:
    """False when numba's cache lacks the solver's compiled kernels (a first run).

    Reads where numba keeps each kernel's cache index; any doubt (another numba, no
    cache) answers True, so the first-run notice is never printed wrongly more than once.
    """
    try:
        from .. import _gradient_projection as gp

        # kernels every solve compiles (the tree twins depend on the network's size)
        kernels = (gp._equilibrate, gp._column_pass, gp._inner_pass, gp._sum_flows,
                   gp._needs_route)
        return all(os.path.exists(k._cache._cache_file._index_path) for k in kernels)
    except Exception:  # noqa: BLE001 - a notice only
        return True


def _stderr_is_terminal() -> bool:
    return sys.stderr.isatty()


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
    ctx = click.get_current_context()
    asking_help = any(a in ("--help", "-h") for a in sys.argv[1:])
    # a person at a terminal waits the ~20 s of a first run: say why (never in pipes)
    if (ctx.invoked_subcommand in SOLVING and not asking_help and _stderr_is_terminal()
            and not kernels_cached()):
        click.echo("congest: first run on this machine: compiling the numerical kernels "
                   "(once, about half a minute; later runs load them)", err=True)
