"""The consistency check on synthetic thumbnails whose right answers are known by construction.

Every image is drawn here in numpy: products with analytic outlines (discs, a table: a top on two
legs) anti-aliased by 5×5 supersampling, a texture (stripes, checker, noise), and a soft contact
shadow that is black with partial alpha, as a shadow catcher writes it. Products are composited
over the shadow with the Porter–Duff "over" operator in straight alpha (Porter & Duff 1984; PNG
stores unassociated alpha: PNG spec §6.2, from memory). Broken copies
mimic real faults: a model in centimetres in a fixed-scale render (×100 or ×0.01), an off-centre
pivot, a flipped image, a model turned over in the scene, a missing texture.
"""

import functools
import json
from pathlib import Path

import numpy as np
import pytest
from markdown_it import MarkdownIt
from PIL import Image
from typer.testing import CliRunner

from shots.batch.jobs import preset_sha256
from shots.check import CheckReport, Tolerances, check_renders, measure_image
from shots.check.report import FLAG_MARK
from shots.cli import app
from shots.errors import BatchError, PresetError
from shots.presets import check_settings, load_preset

S = 192  # frame size in pixels
SUB = 5  # supersamples per pixel and axis (odd: no pixel is exactly half covered)
C = S / 2  # frame centre

# --- drawing ------------------------------------------------------------------------------------


def coverage(inside) -> np.ndarray:
    """(S, S) share of each pixel inside a shape, from SUB × SUB samples; inside(x, y) -> bool."""
    offsets = (np.arange(SUB) + 0.5) / SUB
    axis = (np.arange(S)[:, None] + offsets[None, :]).reshape(-1)
    x, y = np.meshgrid(axis, axis)
    return inside(x, y).reshape(S, SUB, S, SUB).mean(axis=(1, 3))


def disc(cx, cy, r):
    return lambda x, y: (x - cx) ** 2 + (y - cy) ** 2 <= r * r


def table(cx, cy, width, height, turned_over=False):
    """A top slab on two legs, centred on (cx, cy); turned over: legs up, top on the floor."""
    top, slab, leg, inset = cy - height / 2, 0.12 * S, 0.06 * S, 0.03 * S
    left, right = cx - width / 2, cx + width / 2

    def inside(x, y):
        if turned_over:
            y = 2 * cy - y
        in_slab = (x >= left) & (x <= right) & (y >= top) & (y <= top + slab)
        in_legs = (y >= top) & (y <= top + height) & (
            ((x >= left + inset) & (x <= left + inset + leg))
            | ((x >= right - inset - leg) & (x <= right - inset))
        )
        return in_slab | in_legs

    return inside


def pixel_grid():
    y, x = np.mgrid[0:S, 0:S] + 0.5
    return x, y


def texture(kind: str) -> np.ndarray:
    """(S, S) pattern in [0, 1] at pixel centres."""
    x, y = pixel_grid()
    if kind == "stripes":
        return 0.5 + 0.5 * np.sin(2 * np.pi * x / 5)
    if kind == "checker":
        return ((x // 3 + y // 3) % 2).astype(float)
    if kind == "noise":
        return np.random.default_rng(7).random((S, S))
    return np.full((S, S), 0.5)  # "flat"


def shadow(cx, foot, rx, ry, peak) -> np.ndarray:
    """(S, S) alpha of an elliptical soft shadow on the floor, darkest under the product."""
    x, y = pixel_grid()
    d = 1.0 - ((x - cx) / rx) ** 2 - ((y - foot) / ry) ** 2
    return peak * np.sqrt(np.clip(d, 0.0, 1.0))


def product_rgba(shape, base, pattern="stripes", shade=True, floor=None, peak=0.9):
    """(S, S, 4) straight-alpha RGBA in [0, 1]: a textured product over its contact shadow.

    ``floor`` is (cx, foot y, half width) of the shadow, or None for no shadow.
    """
    cover = coverage(shape)
    _, y = pixel_grid()
    tint = 0.24 * (texture(pattern) - 0.5) - (0.06 * (y - C) / S if shade else 0.0)
    colour = np.clip(np.asarray(base)[None, None, :] + tint[..., None], 0.0, 1.0)
    under = np.zeros((S, S)) if floor is None else shadow(*floor, 0.04 * S, peak)
    alpha = cover + under * (1.0 - cover)  # Porter–Duff over, straight alpha; the shadow is black
    share = cover / np.maximum(alpha, 1e-12)  # of the pixel's colour that is product
    rgb = share[..., None] * colour
    return np.concatenate([rgb, alpha[..., None]], axis=2)


def save(path: Path, rgba: np.ndarray) -> Path:
    codes = np.rint(np.clip(rgba, 0.0, 1.0) * 255).astype(np.uint8)
    mode = "RGBA" if codes.shape[2] == 4 else "RGB"
    path.parent.mkdir(parents=True, exist_ok=True)
    Image.fromarray(codes, mode).save(path)
    return path


def over_background(rgba: np.ndarray, top, bottom=None) -> np.ndarray:
    """(S, S, 3) the image over an opaque background (a vertical gradient from top to bottom),
    composited in display values as a viewer does (Porter–Duff over)."""
    bottom = top if bottom is None else bottom
    t = (np.arange(S)[:, None, None] + 0.5) / S
    background = (1 - t) * np.asarray(top) + t * np.asarray(bottom)
    a = rgba[..., 3:4]
    return rgba[..., :3] * a + background * (1 - a)


# --- the catalog ----------------------------------------------------------------------------------

OAK, ASH, WALNUT = (0.62, 0.45, 0.30), (0.58, 0.55, 0.48), (0.52, 0.40, 0.33)
DISC_R = 0.40 * S
TABLE_W, TABLE_H = 0.80 * S, 0.62 * S


def disc_image(r=DISC_R, cx=C, cy=C, base=OAK, pattern="stripes", peak=0.9, **kw):
    floor = (cx, cy + r, 1.1 * r)
    return product_rgba(disc(cx, cy, r), base, pattern, floor=floor, peak=peak, **kw)


def table_image(width=TABLE_W, height=TABLE_H, base=WALNUT, pattern="noise", turned_over=False):
    shape = table(C, C, width, height, turned_over)
    return product_rgba(shape, base, pattern, floor=(C, C + height / 2, 0.55 * width))


GOOD = {
    "oak-disc.png": lambda: disc_image(),
    "ash-disc.png": lambda: disc_image(r=0.39 * S, base=ASH, pattern="checker"),
    "walnut-disc.png": lambda: disc_image(r=0.41 * S, base=WALNUT, pattern="noise"),
    "walnut-table.png": lambda: table_image(),
    "oak-table.png": lambda: table_image(0.78 * S, 0.60 * S, base=OAK, pattern="stripes"),
    "ash-table.png": lambda: table_image(width=0.81 * S, base=ASH, pattern="checker"),
}
# Each broken copy with a word its reasons must contain.
BROKEN = {
    "cm-x100.png": (lambda: disc_image(r=100 * DISC_R), "fill"),  # fixed scale, cm read as m
    "cm-x0.1.png": (lambda: disc_image(r=0.1 * DISC_R), "smaller"),
    "cm-x0.01.png": (lambda: disc_image(r=0.01 * DISC_R), "smaller"),  # 2 × 2 pixels
    "off-centre.png": (lambda: disc_image(cx=C + 0.06 * S), "off centre"),
    "flipped.png": (lambda: disc_image()[::-1], "upside down"),
    "turned-over.png": (lambda: table_image(turned_over=True), "upside down"),
    "no-texture.png": (lambda: disc_image(pattern="flat"), "missing texture"),
}


MAKERS = {**GOOD, **{name: make for name, (make, _) in BROKEN.items()}}


@functools.cache
def drawn(name: str) -> np.ndarray:
    """The catalog image ``name``, drawn once per test session."""
    return MAKERS[name]()


def write_catalog(folder: Path, names=None) -> None:
    for name in names or MAKERS:
        save(folder / name, drawn(name))


@pytest.fixture(scope="module")
def catalog_report(tmp_path_factory) -> CheckReport:
    folder = tmp_path_factory.mktemp("catalog")
    write_catalog(folder)
    return check_renders(folder)


# --- what is flagged ------------------------------------------------------------------------------


def test_flags_the_broken_images_and_only_those(catalog_report):
    flagged = {Path(image).name: reasons for image, reasons in catalog_report.flagged}
    assert set(flagged) == set(BROKEN)
    for name, (_, word) in BROKEN.items():
        assert any(word in reason for reason in flagged[name]), (name, flagged[name])


def test_upside_down_cues(catalog_report):
    by_name = {image.path.name: image for image in catalog_report.images}
    # The flipped image carries its shadow above; the turned-over table keeps it below.
    assert by_name["flipped.png"].measurement.shadow_position < -0.3
    assert by_name["turned-over.png"].measurement.shadow_position > 0.3
    assert any("contact shadow" in r for r in by_name["flipped.png"].reasons)
    assert any("bulk at the bottom" in r for r in by_name["turned-over.png"].reasons)


def test_the_frame_filling_model_is_cut_off(catalog_report):
    image = next(i for i in catalog_report.images if i.path.name == "cm-x100.png")
    assert image.measurement.touches_edge
    assert image.measurement.fill == 1.0


def test_tolerances_move_the_line(tmp_path):
    write_catalog(tmp_path, list(GOOD) + ["off-centre.png"])
    assert [p.name for p, _ in check_renders(tmp_path).flagged] == ["off-centre.png"]
    # 0.06 of the frame off centre is allowed with a 0.1 limit, as a dict or the [check] table.
    assert check_renders(tmp_path, {"centre_offset": 0.1}).flagged == []
    assert check_renders(tmp_path, Tolerances(centre_offset=0.1)).flagged == []


def test_a_catalog_at_one_scale_is_held_only_to_the_centre_line(tmp_path):
    # Discs of different sizes, as products at one fixed scale (fills 0.30–0.80); one sits low,
    # as a shorter product does under a locked camera, one sits to the side, as a product off
    # its pivot does. Fills spread (median deviation 0.07 > 0.04), so fill and the vertical
    # centre are not compared; the horizontal centre still is.
    for k, radius in enumerate([0.15, 0.22, 0.30, 0.40]):
        save(tmp_path / f"size-{k}.png", disc_image(r=radius * S))
    save(tmp_path / "low.png", disc_image(r=0.2 * S, cy=C + 0.1 * S))
    save(tmp_path / "aside.png", disc_image(r=0.2 * S, cx=C + 0.08 * S))
    report = check_renders(tmp_path)
    assert report.medians.fill_spread > Tolerances().fill_spread
    assert [(p.name, r[0][:10]) for p, r in report.flagged] == [("aside.png", "off centre")]
    assert any("vertical centre not compared" in note for note in report.notes)


def test_too_few_images_skip_the_catalog_comparisons(tmp_path):
    write_catalog(tmp_path, ["oak-disc.png", "cm-x0.1.png"])
    report = check_renders(tmp_path)
    assert report.medians.fill is None
    assert any("not compared with the catalog" in note for note in report.notes)
    assert report.flagged == []  # the tiny disc needs a catalog median to stand out


def test_a_flat_catalog_turns_the_texture_check_off(tmp_path):
    for k, base in enumerate([OAK, ASH, WALNUT]):
        save(tmp_path / f"flat-{k}.png", disc_image(base=base, pattern="flat"))
    report = check_renders(tmp_path)
    assert report.flagged == []
    assert any("missing-texture check off" in note for note in report.notes)


# --- the numbers ----------------------------------------------------------------------------------


def bt709_luminance(codes) -> float:
    """Y of 8-bit sRGB codes: IEC 61966-2-1 §5.2 decoding, ITU-R BT.709-6 item 3.2 weights."""
    c = np.asarray(codes) / 255.0
    linear = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return float(linear @ [0.2126, 0.7152, 0.0722])


@pytest.mark.parametrize("radius", [0.1 * S, 0.25 * S, 0.4 * S])
def test_fill_and_area_of_a_disc(tmp_path, radius):
    alone = product_rgba(disc(C, C, radius), OAK, floor=None)
    m = measure_image(save(tmp_path / "disc.png", alone))
    # A disc of radius r spans 2r of the frame; pixels more than half covered span 2r to ±1 px.
    assert abs(m.fill - 2 * radius / S) <= 1 / S
    assert abs(m.fill_width - m.fill_height) <= 1.001 / S
    # Area πr²; counting half-covered pixels errs only on the rim (about 2πr pixels, each
    # rounded to 0 or 1), by a few per cent of it.
    perimeter = 2 * np.pi * radius
    assert abs(m.area_fraction - np.pi * radius**2 / S**2) <= 0.05 * perimeter / S**2
    assert m.centre_offset == pytest.approx((0.0, 0.0), abs=0.5 / S)
    # Over its shadow, an edge pixel less than half covered can reach alpha 0.5 with the shadow
    # and keep some product colour: at most the lower half of the rim, one pixel deep, is added.
    shadowed = measure_image(save(tmp_path / "shadowed.png", disc_image(r=radius)))
    assert abs(shadowed.fill - 2 * radius / S) <= 1 / S
    extra = (shadowed.area_fraction - m.area_fraction) * S**2
    assert 0 <= extra <= perimeter / 2


def test_the_dense_shadow_core_is_not_product(tmp_path):
    # Shadow alpha up to 1.0 under the disc: black, so shadow whatever its alpha.
    m = measure_image(save(tmp_path / "disc.png", disc_image(peak=1.0)))
    assert abs(m.fill_height - 2 * DISC_R / S) <= 1 / S
    assert m.shadow_weight > 100 and m.shadow_position > 0.4
    assert m.background_purity == 1.0


@pytest.mark.parametrize("shift", [(0.05, 0.0), (-0.02, 0.04)])
def test_centre_offset_of_a_shifted_disc(tmp_path, shift):
    rgba = disc_image(r=0.3 * S, cx=C + shift[0] * S, cy=C + shift[1] * S)
    m = measure_image(save(tmp_path / "shifted.png", rgba))
    assert m.centre_offset == pytest.approx(shift, abs=0.5 / S)


@pytest.mark.parametrize("codes", [(200, 150, 90), (40, 90, 160), (128, 128, 128)])
def test_exposure_is_bt709_luminance_of_the_product(tmp_path, codes):
    shape = disc(C, C, 0.3 * S)
    rgba = product_rgba(shape, np.asarray(codes) / 255.0, "flat", shade=False)
    m = measure_image(save(tmp_path / "flat.png", rgba))
    assert m.luminance == pytest.approx(bt709_luminance(codes), rel=1e-6)
    assert m.clipped == 0.0


def test_clipped_share(tmp_path):
    # The left half of the disc at full white: about half the product pixels are clipped.
    rgba = product_rgba(disc(C, C, 0.3 * S), (0.5, 0.5, 0.5), "flat", shade=False)
    x, _ = pixel_grid()
    rgba[..., :3] = np.where((x < C)[..., None] & (rgba[..., 3:] > 0), 1.0, rgba[..., :3])
    m = measure_image(save(tmp_path / "clipped.png", rgba))
    assert m.clipped == pytest.approx(0.5, abs=0.02)


def test_haze_on_a_transparent_background_lowers_purity(tmp_path):
    # A faint grey band (alpha 0.2) along the bottom, like the edge of a visible floor.
    rgba = disc_image()
    band = (np.arange(S) >= 0.94 * S)[:, None] & (rgba[..., 3] == 0)
    rgba[band] = (0.5, 0.5, 0.5, 0.2)
    m = measure_image(save(tmp_path / "haze.png", rgba))
    background = S * S - np.pi * DISC_R**2  # about, less the product's soft rim
    assert m.background_purity == pytest.approx(1 - band.sum() / background, abs=0.01)
    assert m.background_purity < 0.99
    write_catalog(tmp_path, list(GOOD))
    flagged = dict((p.name, r) for p, r in check_renders(tmp_path).flagged)
    assert list(flagged) == ["haze.png"]
    assert flagged["haze.png"] == [next(r for r in flagged["haze.png"] if "purity" in r)]


# --- opaque backgrounds ---------------------------------------------------------------------------


@pytest.mark.parametrize("top, bottom", [((1, 1, 1), None), ((0.95, 0.96, 1.0), (0.8, 0.82, 0.86))])
def test_opaque_background_measures_like_transparent(tmp_path, top, bottom):
    # A soft shadow (at most 20 % darker): on an opaque background only the soft part is removed.
    rgba = disc_image(cx=C + 0.05 * S, peak=0.2)
    see_through = measure_image(save(tmp_path / "a.png", rgba))
    opaque = measure_image(save(tmp_path / "b.png", over_background(rgba, top, bottom)))
    assert not opaque.transparent and see_through.transparent
    assert abs(opaque.fill - see_through.fill) <= 1 / S
    assert opaque.centre_offset == pytest.approx(see_through.centre_offset, abs=1 / S)
    assert opaque.border_std < 0.01
    assert opaque.shadow_position > 0.3


def test_opaque_catalog_flags_the_same_images(tmp_path):
    names = ["oak-disc.png", "ash-disc.png", "walnut-disc.png", "off-centre.png", "no-texture.png"]
    for name in names:
        rgba = drawn(name).copy()
        rgba[..., 3] = np.where(rgba[..., :3].max(axis=2) < 0.01, rgba[..., 3] * 0.2, rgba[..., 3])
        save(tmp_path / name, over_background(rgba, (1.0, 1.0, 1.0)))
    flagged = {p.name for p, _ in check_renders(tmp_path).flagged}
    assert flagged == {"off-centre.png", "no-texture.png"}


def test_an_uneven_opaque_background_is_flagged(tmp_path):
    noise = np.random.default_rng(3).normal(0.0, 0.03, (S, S, 1))
    rgb = np.clip(over_background(disc_image(), (0.9, 0.9, 0.9)) + noise, 0.0, 1.0)
    m = measure_image(save(tmp_path / "noisy.png", rgb))
    assert m.border_std == pytest.approx(0.03, abs=0.005)  # the noise's own σ
    write_catalog(tmp_path, list(GOOD))
    flagged = dict((p.name, r) for p, r in check_renders(tmp_path).flagged)
    assert list(flagged) == ["noisy.png"]
    assert any("uneven background" in r for r in flagged["noisy.png"])


# --- the report files -----------------------------------------------------------------------------


def test_report_markdown_links_every_image_and_marks_the_flagged_rows(catalog_report):
    text = catalog_report.markdown_path.read_text(encoding="utf-8")
    # Parsed by markdown-it-py (CommonMark with the GFM table extension), not by our own code.
    tokens = MarkdownIt("commonmark").enable("table").parse(text)
    images = [child for t in tokens if t.type == "inline" for child in t.children or []
              if child.type == "image"]  # fmt: skip
    sources = [image.attrs["src"] for image in images]
    assert sorted(sources) == sorted(image.name for image in catalog_report.images)
    for src in sources:
        assert (catalog_report.folder / src).is_file()
    rows = [t for t in tokens if t.type == "tr_open"]
    assert len(rows) == len(catalog_report.images) + 1  # + the header row
    flagged_rows = [line for line in text.splitlines() if line.startswith(f"| **{FLAG_MARK}**")]
    assert len(flagged_rows) == len(BROKEN)
    assert all(any(name in row for name in BROKEN) for row in flagged_rows)


def test_report_json_matches_the_report(catalog_report):
    document = json.loads(catalog_report.json_path.read_text(encoding="utf-8"))
    assert document["images_checked"] == len(GOOD) + len(BROKEN)
    assert document["images_flagged"] == len(BROKEN)
    entries = {entry["file"]: entry for entry in document["images"]}
    for image in catalog_report.images:
        entry = entries[image.name]
        assert entry["flagged"] == image.flagged and entry["reasons"] == list(image.reasons)
        if image.measurement.found:
            assert entry["metrics"]["fill"] == pytest.approx(image.measurement.fill)
    assert entries["cm-x0.01.png"]["metrics"]["fill"] == pytest.approx(2 / S)
    assert document["catalog_medians"]["fill"] == pytest.approx(catalog_report.medians.fill)
    assert document["tolerances"]["purity"] == 0.99


def test_subfolders_and_lists_of_paths(tmp_path):
    write_catalog(tmp_path / "chairs", ["oak-disc.png", "ash-disc.png"])
    write_catalog(tmp_path / "tables", ["walnut-table.png", "off-centre.png"])
    report = check_renders(tmp_path)
    assert sorted(i.name for i in report.images) == [
        "chairs/ash-disc.png", "chairs/oak-disc.png", "tables/off-centre.png",
        "tables/walnut-table.png",
    ]  # fmt: skip
    assert "](tables/off-centre.png)" in (tmp_path / "report.md").read_text(encoding="utf-8")
    picked = check_renders([tmp_path / "chairs" / "oak-disc.png", tmp_path / "tables"])
    assert picked.folder == tmp_path.resolve() and len(picked.images) == 3
    assert [p.name for p, _ in picked.flagged] == ["off-centre.png"]


# --- bad input ------------------------------------------------------------------------------------


def test_bad_input(tmp_path):
    with pytest.raises(BatchError, match="no such file"):
        check_renders(tmp_path / "missing")
    with pytest.raises(BatchError, match="no PNG images"):
        check_renders(tmp_path)
    save(tmp_path / "oak-disc.png", disc_image())
    with pytest.raises(PresetError, match="did you mean 'centre_offset'"):
        check_renders(tmp_path, {"center_offset": 0.1})
    with pytest.raises(PresetError, match="check.fill: expected a number"):
        check_renders(tmp_path, {"fill": "wide"})


def test_an_unreadable_image_is_flagged_not_fatal(tmp_path):
    write_catalog(tmp_path, list(GOOD))
    (tmp_path / "broken.png").write_bytes(b"\x89PNG\r\n\x1a\n truncated")
    report = check_renders(tmp_path)
    assert [(p.name, r[0][:15]) for p, r in report.flagged] == [("broken.png", "cannot read the")]
    json.loads(report.json_path.read_text(encoding="utf-8"))


@pytest.mark.parametrize("size", [3, 8, 16])
def test_tiny_images_are_measured(tmp_path, size):
    rgba = np.zeros((size, size, 4))
    rgba[size // 2, size // 2] = (0.6, 0.4, 0.3, 1.0)  # one product pixel in the middle
    m = measure_image(save(tmp_path / "tiny.png", rgba))
    assert m.product_pixels == 1 and m.fill == pytest.approx(1 / size)


# --- the command line and the preset's [check] table ------------------------------------------------


def run_check(*args):
    return CliRunner().invoke(app, ["check", *map(str, args)])


def test_check_json_prints_the_report_on_stdout(tmp_path):
    write_catalog(tmp_path, list(GOOD) + ["off-centre.png"])
    result = run_check(tmp_path, "--json")
    assert result.exit_code == 1  # an image is flagged
    document = json.loads(result.stdout)  # nothing but the report on stdout
    assert document["images_flagged"] == 1
    assert document == json.loads((tmp_path / "report.json").read_text(encoding="utf-8"))
    assert (tmp_path / "review.html").is_file()


def test_tolerances_on_the_command_line_and_in_a_preset(tmp_path):
    write_catalog(tmp_path, list(GOOD) + ["off-centre.png"])
    # 0.06 of the frame off centre: allowed with a limit of 0.1, from the command line ...
    assert run_check(tmp_path, "--tolerance", "centre_offset=0.1").exit_code == 0
    # ... or from a preset's [check] table, which the command line still overrides.
    preset = tmp_path / "team.toml"
    preset.write_text('extends = "thumbnail"\n[check]\ncentre_offset = 0.1\n', encoding="utf-8")
    assert run_check(tmp_path, "--preset", preset).exit_code == 0
    assert run_check(tmp_path, "--preset", preset, "-t", "centre_offset=0.02").exit_code == 1


@pytest.mark.parametrize("option, words", [
    ("fil=0.1", "--tolerance: check.fil: unknown key; did you mean 'fill'?"),
    ("fill=wide", "--tolerance: check.fill: expected a number, got the string 'wide'"),
    ("min_catalog=0", "--tolerance: check.min_catalog: must be at least 1"),
    ("fill", "--tolerance: expected KEY=VALUE"),
])  # fmt: skip
def test_a_bad_tolerance_is_one_line_and_exit_2(tmp_path, option, words):
    write_catalog(tmp_path, list(GOOD))
    result = run_check(tmp_path, "--tolerance", option)
    assert result.exit_code == 2
    assert words in " ".join(result.stderr.split())
    assert "Traceback" not in result.output and not (tmp_path / "report.md").exists()


def test_a_bad_check_table_in_a_preset_names_the_file_and_key(tmp_path):
    preset = tmp_path / "team.toml"
    preset.write_text("[check]\nexposure_stops = -1\n", encoding="utf-8")
    with pytest.raises(PresetError, match=r"team\.toml: check\.exposure_stops: must be at least"):
        load_preset(preset)


def test_check_tolerances_do_not_change_frame_keys():
    # A tolerance changes no pixel, so a team tuning its check re-renders nothing.
    base = load_preset("thumbnail")
    tuned = base.model_copy(update={"check": check_settings({"fill": 0.2})})
    assert preset_sha256(tuned) == preset_sha256(base)


def test_the_review_page_carries_names_as_data_not_markup(tmp_path):
    # A folder named like markup becomes the model's name: it must reach the page as JSON text.
    hostile = "a<script>b"
    write_catalog(tmp_path / hostile, list(GOOD))
    report = check_renders(tmp_path)
    page = report.review_path.read_text(encoding="utf-8")
    data_text = page.split('<script type="application/json" id="review-data">', 1)[1]
    data_text = data_text.split("</script>", 1)[0]
    assert "<" not in data_text
    data = json.loads(data_text)
    assert {image["model"] for image in data["images"]} == {hostile}
    assert all((tmp_path / image["src"]).is_file() for image in data["images"])


def test_check_help_says_what_it_measures():
    text = " ".join(CliRunner().invoke(app, ["check", "--help"]).stdout.split())
    assert "Measure every PNG render" in text
    for option in ("--against", "--tolerance", "--preset", "--json", "--shot"):
        assert option in text
