"""Where a batch writes each file: a path template with known fields only, kept inside OUT.

The template names a frame's PNG file, for example ``"{model}/{variant}/{shot}/{frame}.png"``.
Fields are ``model``, ``variant``, ``shot``, ``frame`` (zero-padded to three digits unless a
format spec such as ``{frame:04d}`` says otherwise) and ``size`` (``"640x480"``). Every value is
made file-name safe before it is placed, attribute and index access (``{model.x}``,
``{shot[0]}``), conversions and unknown fields are refused, and the result must stay inside the
output folder. A shot's animations take the frame path without its ``{frame}`` field.
"""

from __future__ import annotations

import string
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from shots.errors import BatchError
from shots.pipeline import safe_name

DEFAULT_TEMPLATE = "{model}/{variant}/{shot}/{frame}.png"
FIELDS = ("model", "variant", "shot", "frame", "size")
SEPARATORS = "/_-. "  # dropped with the {frame} field when naming a shot's animation

# Catalog-level files, and the folder of per-model manifests; no frame may land on them.
MANIFEST_FOLDER = "manifests"
INDEX_JSON = "index.json"
INDEX_CSV = "index.csv"
CONTACT_SHEET = "contact_sheet.png"
# the consistency report and review page, and its difference pictures (shots.check)
REPORT_MD, REPORT_JSON, REVIEW_HTML = "report.md", "report.json", "review.html"
DIFFERENCES_FOLDER = "differences"
RESERVED = (INDEX_JSON, INDEX_CSV, CONTACT_SHEET, REPORT_MD, REPORT_JSON, REVIEW_HTML)


class FrameNumber(int):
    """A frame index that formats as ``000`` by default and follows an explicit int spec."""

    def __format__(self, spec: str) -> str:
        return format(int(self), spec or "03d")


class SafeFormatter(string.Formatter):
    """``str.format`` restricted to plain named fields from a fixed set.

    Refuses ``{0}``/``{}``, ``{a.b}``, ``{a[0]}``, ``!r`` conversions, nested fields inside a
    format spec and any field not in ``allowed``; every formatted value is passed through
    ``safe_name`` so it is one harmless path component.
    """

    def __init__(self, allowed: tuple[str, ...], source: str = "--template"):
        self.allowed = allowed
        self.source = source
        self.template = ""

    def vformat(self, format_string, args, kwargs):
        self.template = format_string  # for messages
        return super().vformat(format_string, args, kwargs)

    def check(self, template: str) -> list[str]:
        """The field names ``template`` uses, in order; BatchError for anything refused."""
        names = []
        try:
            parsed = list(self.parse(template))
        except ValueError as exc:
            raise self._error(template, f"not a valid template: {exc}") from None
        for _, name, spec, conversion in parsed:
            if name is None:
                continue
            if name == "" or name.isdigit():
                raise self._error(template, "use named fields such as {model}, not {} or {0}")
            if "." in name or "[" in name:
                raise self._error(template, f"{{{name}}}: attribute and index access are refused")
            if name not in self.allowed:
                raise self._error(
                    template, f"unknown field {{{name}}} (known: {', '.join(self.allowed)})"
                )
            if conversion:
                raise self._error(template, f"{{{name}!{conversion}}}: conversions are refused")
            if spec and ("{" in spec or "}" in spec):
                raise self._error(template, f"{{{name}}}: nested fields in a format spec")
            names.append(name)
        return names

    def get_field(self, field_name, args, kwargs):
        if field_name not in self.allowed or field_name not in kwargs:
            raise self._error(self.template, f"unknown field {{{field_name}}}")
        return kwargs[field_name], field_name

    def format_field(self, value, format_spec):
        try:
            text = format(value, format_spec)
        except (ValueError, TypeError) as exc:
            raise self._error(self.template,
                              f"format spec {format_spec!r} does not fit: {exc}") from None
        return safe_name(text)

    def _error(self, template: str, message: str) -> BatchError:
        return BatchError(self.source, template or None, message)


@dataclass(frozen=True)
class Layout:
    """Output paths of a batch under ``out_dir``.

    Attributes
    ----------
    out_dir : the output folder (absolute).
    template : the frame path template, relative to ``out_dir``, ending in ``.png``.
    """

    out_dir: Path
    template: str = DEFAULT_TEMPLATE

    @staticmethod
    def create(out_dir: Path, template: str | None = None) -> Layout:
        """Check ``template`` and return the layout; BatchError for a refused template."""
        template = DEFAULT_TEMPLATE if template is None else template
        layout = Layout(Path(out_dir).resolve(), template)
        fields = SafeFormatter(FIELDS).check(template)
        if not template.endswith(".png"):
            raise BatchError("--template", template, "must end with .png (frames are PNG files)")
        if template.startswith(("/", "\\")) or (len(template) > 1 and template[1] == ":"):
            raise BatchError("--template", template, "must be relative to the output folder")
        if fields.count("frame") > 1:
            raise BatchError("--template", template, "use {frame} at most once")
        layout.frame_path("model", "variant", "shot", 0, "1x1")  # a bad format spec fails here
        return layout

    @property
    def fields(self) -> list[str]:
        return SafeFormatter(FIELDS).check(self.template)

    def frame_path(self, model: str, variant: str, shot: str, index: int, size: str) -> str:
        """The frame's file, relative to ``out_dir`` (POSIX separators)."""
        values = dict(model=model, variant=variant, shot=shot, frame=FrameNumber(index), size=size)
        return self._place(self.template, values)

    def animation_path(self, model: str, variant: str, shot: str, size: str, ext: str) -> str:
        """A shot's animation (``ext`` "gif", "webp", "mp4"), relative to ``out_dir``."""
        values = dict(model=model, variant=variant, shot=shot, size=size)
        stem = self._place(self._without_frame(), values).removesuffix(".png")
        return f"{stem}.{ext}"

    def manifest_path(self, model: str) -> str:
        return f"{MANIFEST_FOLDER}/{safe_name(model)}.json"

    def absolute(self, relative: str) -> Path:
        return self.out_dir / relative

    def _without_frame(self) -> str:
        """The template with its ``{frame}`` field (and one separator just before it) removed."""
        pieces = []
        for literal, name, spec, _ in SafeFormatter(FIELDS).parse(self.template):
            if name == "frame" and literal[-1:] and literal[-1] in SEPARATORS:
                literal = literal[:-1]
            pieces.append(literal.replace("{", "{{").replace("}", "}}"))
            if name is not None and name != "frame":
                pieces.append("{" + name + (":" + spec if spec else "") + "}")
        text = "".join(pieces)
        if text == ".png" or text.endswith("/.png"):  # the frame number was the whole file name
            text = text[:-4] + "animation.png"
        return text

    def derivative_path(self, template: DerivativeTemplate, values: dict) -> str:
        """A derivative's file, relative to ``out_dir``: ``template`` filled with ``values``
        (the frame's fields, ``name``, ``view`` and the product table's columns)."""
        return self._place(template.text, {**values, "frame": FrameNumber(values["frame"])},
                           template.fields, template.source, template.field)

    def _place(self, template: str, values: dict, allowed: tuple[str, ...] = FIELDS,
               source: str = "--template", field: str | None = None) -> str:
        where = field or template
        relative = SafeFormatter(allowed, source).vformat(template, (), values)
        parts = PurePosixPath(relative.replace("\\", "/")).parts
        if ".." in parts:
            raise BatchError(source, where, f"{relative!r} leaves the output folder")
        if not parts or any(p in ("", ".") for p in parts) or relative.startswith("/"):
            raise BatchError(source, where, f"gives an unusable path {relative!r}")
        target = (self.out_dir / Path(*parts)).resolve()
        if not target.is_relative_to(self.out_dir) or target == self.out_dir:
            raise BatchError(source, where, f"{relative!r} leaves the output folder")
        posix = "/".join(parts)
        if parts[0] in RESERVED or parts[0] in (MANIFEST_FOLDER, DIFFERENCES_FOLDER):
            raise BatchError(source, where, f"{posix!r} is where the batch keeps its own files")
        return posix


DERIVATIVE_FIELDS = ("model", "variant", "shot", "frame", "view", "size", "name")


@dataclass(frozen=True)
class DerivativeTemplate:
    """A derivative's path template, checked: ``source`` and ``field`` name where it was set
    (the preset file and ``derivatives[i].path``) for messages; ``fields`` are the allowed
    ones, ``used`` those it names."""

    text: str
    source: str
    field: str
    fields: tuple[str, ...]
    used: tuple[str, ...]

    @staticmethod
    def create(text: str, source: str, field: str,
               product_fields: tuple[str, ...] = ()) -> DerivativeTemplate:
        """Check the template; BatchError naming ``source`` and ``field`` if it is refused."""
        allowed = DERIVATIVE_FIELDS + tuple(product_fields)
        formatter = SafeFormatter(allowed, source)
        try:
            used = formatter.check(text)
        except BatchError as exc:
            hint = ("; {sku} and the product columns need [publish] products"
                    if not product_fields and "unknown field" in exc.message else "")
            raise BatchError(source, field, f"{text!r}: {exc.message}{hint}") from None
        if text.startswith(("/", "\\")) or (len(text) > 1 and text[1] == ":"):
            raise BatchError(source, field, f"{text!r} must be relative to the output folder")
        return DerivativeTemplate(text, source, field, allowed, tuple(used))
