"""From nothing to a printed schedule in headless Chromium, through the pages only (no JSON):
a blank project from the new-project page with a typed outline, two units, a method, a
layout with a probe, the comparison, document control and health and safety notes, and the
schedule printed to PDF on ISO A4 and US Letter. Then the demo's outline changed with probes
left outside, and the work carried on in one step.

Waits are on selectors and texts, never on sleeps.
"""

from __future__ import annotations

import io
import re

from caution_check import assert_caution

from probewise.web.symbols import SYMBOLS

# ISO 216 A4 is 210 x 297 mm = 595.3 x 841.9 pt; ANSI/ASME Y14.1 Letter is 8.5 x 11 in =
# 612 x 792 pt (1 pt = 1/72 in).
A4_PT = (595.3, 841.9)
LETTER_PT = (612.0, 792.0)


def no_script_errors(page) -> None:
    assert page.js_errors == [], page.js_errors


def saved(page, root: str) -> None:
    page.wait_for_selector(f"{root} .notice-ok")


def add_unit(page, name: str, low: str, likely: str, high: str) -> None:
    page.locator("#ground summary", has_text="Add a unit").click()
    page.fill("#f-new_unit-name", name)
    page.fill("#f-new_unit-thickness_m-min", low)
    page.fill("#f-new_unit-thickness_m-likely", likely)
    page.fill("#f-new_unit-thickness_m-max", high)
    page.fill("#f-new_unit-correlation-range_m", "60")
    page.get_by_role("button", name="Add unit").click()
    page.wait_for_selector(f"#ground .notice-ok:has-text('{name}')")


def pdf_page_size(pdf: bytes) -> tuple[float, float]:
    from pypdf import PdfReader

    box = PdfReader(io.BytesIO(pdf)).pages[0].mediabox
    return float(box.width), float(box.height)


def pdf_text(pdf: bytes) -> str:
    from pypdf import PdfReader

    return "\n".join(p.extract_text() for p in PdfReader(io.BytesIO(pdf)).pages)


def test_blank_project_to_printed_schedule(page, server_url, artifacts):
    page.goto(f"{server_url}/")
    page.fill("#new-name", "Culvert on a blank page (invented)")
    page.fill("#new-currency", "EUR")
    page.fill("#new-outline", "0, 0\n160, 0\n160, 90\n0, 90")
    page.locator("#new-project-form button[type=submit]").click()
    page.wait_for_selector("#overview")
    project = int(re.search(r"/projects/(\d+)", page.url).group(1))
    base = f"{server_url}/projects/{project}"

    page.goto(f"{base}/ground")
    add_unit(page, "Alluvial clay (invented)", "1", "3", "6")
    add_unit(page, "Terrace gravel (invented)", "0.5", "2", "4")

    page.goto(f"{base}/methods")
    page.locator("summary", has_text="Add a method").click()
    for field, value in (
        ("id", "BH"),
        ("name", "Borehole (invented rates)"),
        ("cost-mobilisation", "1500"),
        ("cost-per_location", "300"),
        ("cost-per_metre", "60"),
        ("metres_per_day", "15"),
        ("max_depth_m", "30"),
    ):
        page.fill(f"#f-new_method-{field}", value)
    page.get_by_role("button", name="Add method").click()
    saved(page, "#methods")
    for cell in page.locator("#precision-form input.num-input").all():
        cell.fill("0.2")
    page.get_by_role("button", name="Save precision table").click()
    saved(page, "#methods")

    page.goto(f"{base}/options")
    page.fill("#new-layout-name", "Stage 1")
    page.get_by_role("button", name="Create layout").click()
    page.wait_for_selector("#add-probe-form")
    page.fill("#add-x", "80")
    page.fill("#add-y", "45")
    page.get_by_role("button", name="Add probe").click()
    page.wait_for_selector("#probes-table tbody tr")
    # the Leaflet map draws the probe in the server's symbol: the borehole outline, code inside
    icon = page.locator(".options-map .pw-probe-icon .probe-borehole").first
    icon.wait_for()
    assert icon.locator("path.probe-shape").get_attribute("d") == SYMBOLS["borehole"].svg_path()
    assert icon.locator("text.probe-code").text_content() == "BH"
    assert "Planned Borehole: BH" in page.locator(".probe-legend").inner_text()

    page.goto(f"{base}/compare")
    page.wait_for_selector("#ranking-table")
    assert "Stage 1" in page.locator("#ranking-table").inner_text()

    page.goto(f"{base}/schedule")
    page.wait_for_selector("#schedule-table")
    page.locator("#document-edit summary", has_text="Document control").click()
    page.fill("#f-document-prepared_by", "R. Driller (invented)")
    page.fill("#f-document-reference", "CBP-GI-001")
    page.get_by_role("button", name="Save document control").click()
    page.wait_for_selector("#schedule .notice-ok")
    page.locator("#document-edit summary", has_text="Health and safety").click()
    page.fill("#f-safety-hazards-buried_services", "Water main along the north fence")
    page.get_by_role("button", name="Save health and safety notes").click()
    page.wait_for_selector("#safety-notes:has-text('Water main along the north fence')")
    page.wait_for_function(
        "() => Array.from(document.images).every(img => img.complete && img.naturalWidth > 0)"
    )
    pdf = page.pdf(prefer_css_page_size=True, print_background=True)
    (artifacts / "blank-schedule-a4.pdf").write_bytes(pdf)
    width, height = pdf_page_size(pdf)
    assert abs(width - A4_PT[0]) < 1.5 and abs(height - A4_PT[1]) < 1.5  # ISO 216 A4
    text = pdf_text(pdf)
    assert_caution(text)
    for words in (
        "R. Driller (invented)",
        "CBP-GI-001",
        "Water main along the north fence",
        "Health and safety",
        "Stage 1",
        "EUR",
    ):
        assert words in text, words
    assert "Document control and health and safety" not in text  # the edit forms stay on screen

    page.goto(f"{base}/schedule?paper=letter")
    page.wait_for_selector(".paper-letter #schedule-table")
    letter = page.pdf(prefer_css_page_size=True, print_background=True)
    (artifacts / "blank-schedule-letter.pdf").write_bytes(letter)
    width, height = pdf_page_size(letter)
    assert abs(width - LETTER_PT[0]) < 1.5 and abs(height - LETTER_PT[1]) < 1.5  # ANSI Letter
    no_script_errors(page)


def test_demo_outline_change_with_probes_outside(page, server_url, demo_project, artifacts):
    base = f"{server_url}/projects/{demo_project}"
    page.goto(f"{base}/site")
    page.wait_for_selector("#site")
    revision = int(page.locator(".current-revision").first.inner_text())
    page.locator("#site summary", has_text="Edit the outline as coordinates").click()
    # the western half of the demo site (invented): the eastern probes fall outside
    page.fill(
        "#f-site",
        "451163.1, 283487.9\n451405.6, 283548.4\n451449.0, 283399.5\n451196.9, 283352.1",
    )
    page.get_by_role("button", name="Save outline").click()
    page.wait_for_selector("#outline-outside")
    listed = page.locator("#outline-outside").inner_text()
    assert "existing probe" in listed and "planned probe" in listed
    page.locator("#outline-outside label", has_text="move each to the nearest point").click()
    page.locator("#outline-apply").click()
    page.wait_for_selector("#site .notice-ok")
    assert "moved" in page.locator("#site .notice-ok").inner_text()
    assert int(page.locator(".current-revision").first.inner_text()) == revision + 1

    page.goto(f"{base}/schedule")
    page.wait_for_selector("#schedule-table")
    page.screenshot(path=str(artifacts / "outline-changed-schedule.png"), full_page=True)
    # the browser logs the first, refused save (422: nothing stored yet) as a console error
    refused = [e for e in page.js_errors if "status of 422" in e and "/site/outline" in e]
    assert len(refused) == 1, page.js_errors
    page.js_errors.remove(refused[0])
    no_script_errors(page)
