"""The ``lowflow`` command line: one verb a module, all sharing one error policy.

Errors a user can cause (bad values, bad files) print one line on stderr naming the field, the
value and the valid range, and exit with status 2. No traceback reaches the user.

Each verb lives in its own module of this package and registers itself on :data:`app` with
``@app.command()``; add the module name to ``_VERBS`` below.
"""

from __future__ import annotations

import importlib
import sys

import typer

from .. import __version__
from ..caution import CAUTION  # re-exported for the verbs
from ..errors import InputError, reads_recorded

app = typer.Typer(
    name="lowflow",
    help="Low-flow anaesthesia gas-consumption and cost estimator. " + CAUTION,
    no_args_is_help=True,
    add_completion=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)

_VERBS: tuple[str, ...] = (
    "mac",
    "case",
    "safe_flow",
    "flowmeter",
    "supply",
    "audit",
    "forecast",
    "schema",
    "compare",
    "app_verb",
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"lowflow {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
) -> None:
    """Low-flow anaesthesia gas-consumption and cost estimator."""


for _name in _VERBS:
    importlib.import_module(f"{__name__}.{_name}")


def fail(message: str) -> None:
    """Print one error line on stderr and exit with status 2."""
    typer.echo(f"lowflow: error: {message}", err=True)
    raise SystemExit(2)


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point; maps every user error to one line and exit status 2.

    Without ``argv`` (the ``lowflow`` script, ``python -m estimator``) this is the process's entry point,
    and the process settings of :mod:`estimator.cli.process` apply.
    """
    from . import process

    if argv is None:
        process.begin()
    try:
        _dispatch(argv)
    finally:
        process.finish()


def _dispatch(argv: list[str] | None) -> None:
    import importlib.util

    # typer >= 0.20 vendors click (typer._click); older typer uses click itself.
    vendored = importlib.util.find_spec("typer._click") is not None
    click_exc = importlib.import_module("typer._click.exceptions" if vendored else "click.exceptions")
    # click < 8.2 has no NoArgsIsHelpError (it prints the help and exits 0 itself); () matches nothing.
    no_args_is_help = getattr(click_exc, "NoArgsIsHelpError", ())

    from .outputs import announce_first_compile

    announce_first_compile(sys.argv[1:] if argv is None else argv)
    try:
        with reads_recorded():  # provenance digests the bytes each result was computed from
            rv = app(args=argv, standalone_mode=False)
    except InputError as exc:
        fail(str(exc))
    except no_args_is_help as exc:
        typer.echo(exc.ctx.get_help() if exc.ctx is not None else "lowflow --help")
        raise SystemExit(0) from None
    except click_exc.UsageError as exc:
        hint = f" (see 'lowflow {exc.ctx.info_name} --help')" if exc.ctx is not None and exc.ctx.parent else ""
        fail(exc.format_message().replace("\n", " ") + hint)
    except typer.Exit as exc:
        raise SystemExit(exc.exit_code) from None
    except click_exc.ClickException as exc:
        fail(exc.format_message().replace("\n", " "))
    except typer.Abort:
        raise SystemExit(130) from None
    except OSError as exc:
        fail(f"{exc.filename or 'file'}: {exc.strerror or exc}")
    except UnicodeDecodeError:
        fail("input file: not UTF-8 text; expected a UTF-8 TOML or CSV file")
    except RecursionError:
        fail("input: nested too deeply (arrays or tables hundreds deep); expected a plain input file")
    except KeyboardInterrupt:
        raise SystemExit(130) from None
    except SystemExit:
        raise
    except Exception as exc:  # noqa: BLE001 - last line of defence: never show a traceback
        typer.echo(f"lowflow: internal error: {type(exc).__name__}: {exc} (please report it)", err=True)
        raise SystemExit(1) from None
    raise SystemExit(rv if isinstance(rv, int) else 0)


if __name__ == "__main__":  # pragma: no cover
    main(sys.argv[1:])
