"""The ``bandwise`` command line: a thin layer over the library.

Exit codes: 0 the job ran and found nothing at or above ``--fail-on``;
1 it ran and found such problems; 2 it could not run (bad input, bad option).
Every :class:`~bandwise.core.errors.BandwiseError` becomes one line on stderr.
"""

from __future__ import annotations

import json
import os
import sys
from collections.abc import Callable
from functools import wraps
from typing import Annotated, Any

import typer

from bandwise import __version__
from bandwise.core.caution import CAUTION  # noqa: F401  (re-exported to the command modules)
from bandwise.core.dofs import PHYSICS
from bandwise.core.errors import BandwiseError
from bandwise.core.jsonable import json_default

app = typer.Typer(
    name="bandwise",
    help="Pre-flight checks, sizing and node renumbering of finite-element meshes "
         "for direct solvers.",
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
)

EXIT_OK, EXIT_FINDINGS, EXIT_CANNOT_RUN = 0, 1, 2


def fail(message: str) -> None:
    """Print one error line on stderr and exit with code 2."""
    typer.echo(f"bandwise: error: {message}", err=True)
    raise typer.Exit(EXIT_CANNOT_RUN)


def guarded(func: Callable[..., Any]) -> Callable[..., Any]:
    """Turn library errors (and anything unexpected) into one line and exit code 2."""

    @wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return func(*args, **kwargs)
        except (typer.Exit, typer.Abort, SystemExit):
            raise
        except BandwiseError as exc:
            fail(str(exc))
        except KeyboardInterrupt:
            fail("interrupted")
        except BrokenPipeError:  # output piped into a command that stopped reading
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())  # as the Python docs advise for SIGPIPE
            raise typer.Exit(EXIT_OK) from None
        except MemoryError:
            fail("out of memory")
        except Exception as exc:  # never a traceback for the user
            if os.environ.get("BANDWISE_DEBUG"):
                raise
            fail(f"internal error: {type(exc).__name__}: {exc} "
                 "(set BANDWISE_DEBUG=1 for details)")

    return wrapper


def emit_json(data: dict[str, Any]) -> None:
    """Write one JSON document on stdout."""
    sys.stdout.write(json.dumps(data, indent=2, default=json_default) + "\n")


FormatOpt = Annotated[str | None, typer.Option(
    "--format", help="Format name of the input (gmsh, vtu, med, ...); overrides the "
                     "extension (.msh is read as gmsh unless told otherwise).")]
DofsOpt = Annotated[int | None, typer.Option(
    "--dofs-per-node", min=1, max=64,
    help="DOFs at every node; default: chosen from the element families present.")]
PhysicsOpt = Annotated[str | None, typer.Option(
    "--physics", help=f"Field being solved for: {' | '.join(PHYSICS)} "
                      "(scalar = 1 DOF per node, e.g. heat conduction).")]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print the results as JSON on stdout.")]


@app.callback(invoke_without_command=True)
def _root(
    version: Annotated[bool, typer.Option("--version", help="Print the version and exit.")] = False,
) -> None:
    if version:
        typer.echo(f"bandwise {__version__}")
        raise typer.Exit(0)


#: Command modules; each registers its command on :data:`app` when imported.
COMMAND_MODULES = ("check_cmd", "renumber_cmd", "report_cmd", "merge_cmd")


def load_commands() -> None:
    """Import every command module so that each registers itself on ``app``."""
    import importlib

    for name in COMMAND_MODULES:
        importlib.import_module(f"{__name__}.{name}")


def main() -> None:
    """Entry point of the ``bandwise`` console script and ``python -m bandwise``."""
    load_commands()
    app()
