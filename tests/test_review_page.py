"""The review page in a real browser: headless Chromium driven by Playwright.

Two small batches of demo models (a chair and the product with colour variants, a still and an
8-frame turntable each): the approved one, and one where a chair leg was moved. Checking the
second against the first flags the chair and writes review.html; the page is opened from disk.

Needs Debian's ``chromium`` (``apt-get install chromium``; ``.ci/run`` installs it) and the
``playwright`` package (the dev extra); without them the tests skip and say why.
"""

from __future__ import annotations

import shutil

import pytest
from broken_copies import moved_part_copy, product_file

from shots.batch import run_batch
from shots.check import check_renders

pytestmark = pytest.mark.slow  # two batches of about 36 small frames, and a browser

CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                  "--disable-component-update", "--no-first-run", "--disable-sync"]
PRESET = """
extends = "thumbnail"
[image]
width = 64
height = 64
samples = 4
[[shots]]
name = "still"
kind = "views"
views = ["front_left"]
elevation_deg = 20
[[shots]]
name = "spin"
kind = "turntable"
frames = 8
"""


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


@pytest.fixture(scope="module")
def browser():
    playwright_api = pytest.importorskip(
        "playwright.sync_api", reason="no browser driver: pip install playwright (dev extra)")
    executable = chromium_path()
    if executable is None:
        pytest.skip("no browser: install Debian's chromium (apt-get install -y chromium)")
    with playwright_api.sync_playwright() as driver:
        launched = driver.chromium.launch(executable_path=executable, args=CHROMIUM_FLAGS)
        yield launched
        launched.close()


@pytest.fixture(scope="module")
def review(tmp_path_factory):
    """review.html of the edited batch checked against the approved one."""
    root = tmp_path_factory.mktemp("review")
    chair, varied = product_file("chair"), product_file(with_variants=True)
    approved_models, edited_models = root / "approved-models", root / "edited-models"
    approved_models.mkdir()
    for model in (chair, varied):
        shutil.copy(model, approved_models)
    shutil.copytree(approved_models, edited_models)
    moved_part_copy(chair, edited_models)  # overwrites the chair with the edited one
    preset = root / "preset.toml"
    preset.write_text(PRESET, encoding="utf-8")
    for models, out in ((approved_models, "approved"), (edited_models, "edited")):
        run_batch(models, preset, root / out, variants="all", workers=1, quiet=True,
                  animations=())
    # The stills are checked (a turntable's frames share one framing, so they are not held to
    # the centre one by one); the page still plays every turntable the manifests list.
    report = check_renders(root / "edited", against=root / "approved", shot="still")
    return {"report": report, "page": report.review_path, "chair": chair.stem}


@pytest.fixture
def page(browser, review):
    """The review page opened from disk, with its console errors and requests recorded."""
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    opened = context.new_page()
    opened.errors, opened.requests = [], []
    opened.on("console", lambda m: opened.errors.append(m.text) if m.type == "error" else None)
    opened.on("pageerror", lambda exc: opened.errors.append(str(exc)))
    opened.on("request", lambda request: opened.requests.append(request.url))
    opened.goto(review["page"].resolve().as_uri())
    opened.wait_for_load_state("load")
    yield opened
    context.close()


def test_the_check_flags_the_moved_leg_only(review):
    flagged = {image.record.model for image in review["report"].images if image.flagged}
    assert flagged == {review["chair"]}
    assert all((review["report"].folder / image.baseline.difference).is_file()
               for image in review["report"].images if image.flagged)


def test_page_loads_from_disk_without_errors_or_network(page, review):
    assert page.title() == "Catalog review"
    assert page.errors == []
    assert page.requests and all(url.startswith("file://") for url in page.requests)
    summary = page.inner_text("#summary")
    assert f"{len(review['report'].images)} images" in summary


def test_every_image_loads(page, review):
    page.wait_for_function("Array.from(document.images).every(i => i.complete)")
    sizes = page.eval_on_selector_all("img", "all => all.map(i => [i.getAttribute('src'), "
                                             "i.naturalWidth])")
    assert len(sizes) >= len(review["report"].images)
    assert [src for src, width in sizes if width == 0] == []


def frame_shown(page) -> tuple[str, str]:
    player = page.locator(".player").first
    return player.get_attribute("data-frame"), player.locator("img").get_attribute("src")


def test_dragging_across_the_turntable_turns_it(page):
    stage = page.locator(".player .tile").first
    stage.scroll_into_view_if_needed()
    box = stage.bounding_box()
    before = frame_shown(page)
    assert before[0] == "0"
    page.mouse.move(box["x"] + 10, box["y"] + box["height"] / 2)
    page.mouse.down()
    page.mouse.move(box["x"] + box["width"] * 0.6, box["y"] + box["height"] / 2, steps=12)
    page.mouse.up()
    after = frame_shown(page)
    assert after[0] != "0" and after[1] != before[1]
    # A drag across 60 % of the width turns 60 % of a turn: frame round(0.6·8 − 10/w·8).
    assert int(after[0]) in (4, 5)


def test_scrolling_and_keys_turn_the_turntable(page):
    stage = page.locator(".player .tile").first
    stage.scroll_into_view_if_needed()
    stage.hover()
    page.mouse.wheel(0, 120)  # three 40-pixel steps
    assert frame_shown(page)[0] == "3"
    player = page.locator(".player").first
    player.focus()
    page.keyboard.press("ArrowRight")
    assert frame_shown(page)[0] == "4"
    page.keyboard.press("End")
    assert frame_shown(page)[0] == "7"
    page.keyboard.press("ArrowRight")  # round the turn
    assert frame_shown(page)[0] == "0"


def test_the_flagged_filter_hides_unflagged_cards(page):
    unflagged, flagged = page.locator(".card:not(.is-flagged)"), page.locator(".card.is-flagged")
    assert unflagged.count() > 0 and flagged.count() > 0
    assert unflagged.first.is_visible()
    page.click("#filter-flagged")
    assert all(not card.is_visible() for card in unflagged.all())
    assert any(card.is_visible() for card in flagged.all())
    assert page.get_attribute("#filter-flagged", "aria-pressed") == "true"
    page.click("#filter-all")
    assert unflagged.first.is_visible()


def test_before_and_after_of_a_flagged_image(page):
    compare = page.locator("#attention-cards .compare").first
    sources = compare.locator("img").evaluate_all("all => all.map(i => i.getAttribute('src'))")
    assert sources[0].startswith("../approved/") and not sources[1].startswith("../")
    slider = page.locator("#attention-cards input[type=range]").first
    slider.fill("20")
    assert compare.evaluate("c => c.style.getPropertyValue('--split')") == "20%"
