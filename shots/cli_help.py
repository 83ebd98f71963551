"""How ``shots`` prints its help: plain metavars, as the README's reference writes them.

typer 0.29 prints a required argument as ``{model}`` in the usage line, which reads like one of
our path-template fields, and a value type such as ``<bool>`` beside every flag, as if it took a
value. Commands made with ``ShotsCommand`` print ``MODEL`` instead, and flags declared with
``metavar=FLAG`` (and ``--help``) print no value.
"""

from __future__ import annotations

from typer.core import TyperCommand, TyperGroup

FLAG = ""  # the metavar of an on/off option: nothing, since it takes no value


class PlainHelp:
    """Arguments by their metavar in the usage line, and no value type on ``--help``.

    Overrides click's public ``collect_usage_pieces`` and ``get_help_option``, which typer's
    command classes keep, so older typer releases print the same.
    """

    def collect_usage_pieces(self, ctx) -> list[str]:
        plain = {}
        for param in self.get_params(ctx):
            if param.param_type_name == "argument":
                name = param.metavar or param.name.upper()
                for piece in param.get_usage_pieces(ctx):
                    plain[piece] = name if param.required else f"[{name}]"
        return [plain.get(piece, piece) for piece in super().collect_usage_pieces(ctx)]

    def get_help_option(self, ctx):
        option = super().get_help_option(ctx)
        if option is not None:
            option.metavar = FLAG
        return option


class ShotsCommand(PlainHelp, TyperCommand):
    """A ``shots`` subcommand."""


class ShotsGroup(PlainHelp, TyperGroup):
    """The ``shots`` command itself."""
