"""``lowflow schema KIND``: print the JSON Schema of an input file format."""

from __future__ import annotations

import typer

from ..choices import FileKind
from ..errors import InputError
from . import app


@app.command("schema")
def schema(
    kind: FileKind = typer.Argument(..., help="The input file format."),
) -> None:
    """The JSON Schema (draft 2020-12) of an input file, for editors and other programs."""
    import json

    from ..inputs.schemas import json_schema

    if kind is None:  # typer before 0.17 with click 8.2 passes a missing required argument as None
        raise InputError("KIND", "(missing)", "one of " + ", ".join(k.value for k in FileKind))
    typer.echo(json.dumps(json_schema(kind.value), indent=2))
