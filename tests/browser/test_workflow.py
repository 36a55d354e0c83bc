"""The workflow an engineer follows, in headless Chromium against a real server:
open the demo, change a unit's thickness range and see the comparison change, add a probe by
clicking the map (and undo it), run the optimiser with a budget and see the progress bar and
the new layout, type a section's ends and see its line move on the map, open the schedule and
print it to PDF. Screenshots go to test-artifacts/.

Waits are on selectors and texts, never on sleeps.
"""

from __future__ import annotations

import io
import re

import httpx
from caution_check import assert_caution

OPTIMISER_WAIT_MS = 300_000  # a deadline to stop waiting, not a timing assertion
LEAN = "Lean: CPTu only"


def shot(page, artifacts, name: str) -> None:
    # caret="initial": hiding the caret leaves style="" on inputs, which htmx would then copy
    # onto their successors (a CSP report that a real user never causes)
    page.screenshot(path=str(artifacts / f"{name}.png"), full_page=True, caret="initial")


def no_script_errors(page) -> None:
    assert page.js_errors == [], page.js_errors


def wait_for_map(page, map_class: str) -> None:
    page.wait_for_selector(f".{map_class}.leaflet-container .leaflet-overlay-pane path")


def revision_shown(page) -> int:
    return int(page.locator(".current-revision").first.inner_text())


def gains_shown(page) -> list[str]:
    page.wait_for_selector("#ranking-table")
    return page.locator("#ranking-table td.gain").all_inner_texts()


# ---------------------------------------------------------------- open the demo, print


def test_demo_to_printed_schedule(page, server_url, demo_project, artifacts):
    from pypdf import PdfReader

    page.goto(f"{server_url}/")
    shot(page, artifacts, "01-projects")
    page.locator(f'a[href="/projects/{demo_project}"]').first.click()
    page.wait_for_selector("#overview")
    shot(page, artifacts, "02-overview")

    page.locator("#workflow-nav a", has_text="Options").click()
    wait_for_map(page, "options-map")
    page.wait_for_selector(".options-map .pw-probe-labelled")
    shot(page, artifacts, "03-options")

    page.locator("#workflow-nav a", has_text="Compare").click()
    page.wait_for_selector("#ranking-table")
    wait_for_map(page, "compare-map")
    page.wait_for_function(
        "() => Array.from(document.images).every(img => img.complete && img.naturalWidth > 0)",
        timeout=90_000,  # Compare draws a dozen figures (maps, value charts) on first load
    )
    shot(page, artifacts, "04-compare")

    page.locator("#workflow-nav a", has_text="Schedule").click()
    page.wait_for_selector("#schedule-table")
    page.wait_for_function(
        "() => Array.from(document.images).every(img => img.complete && img.naturalWidth > 0)",
        timeout=90_000,  # Compare draws a dozen figures (maps, value charts) on first load
    )
    shot(page, artifacts, "05-schedule")
    probe_ids = page.locator("#schedule-table tbody th").all_inner_texts()
    assert probe_ids

    pdf = page.pdf(prefer_css_page_size=True, print_background=True)
    (artifacts / "schedule-a4.pdf").write_bytes(pdf)
    assert len(pdf) > 10_000
    reader = PdfReader(io.BytesIO(pdf))
    text = "\n".join(p.extract_text() for p in reader.pages)
    for probe_id in probe_ids:
        assert probe_id in text
    assert_caution(text)
    assert "Scoping schedule" in text.replace("SCOPING SCHEDULE", "Scoping schedule")
    width, height = reader.pages[0].mediabox.width, reader.pages[0].mediabox.height
    assert abs(float(width) - 595) < 2 and abs(float(height) - 842) < 2  # A4 in points

    page.locator("label.check", has_text="Letter").click()
    page.locator(".schedule-controls button[type=submit]").click()
    page.wait_for_selector(".paper-letter #schedule-table")
    letter = page.pdf(prefer_css_page_size=True, print_background=True)
    (artifacts / "schedule-letter.pdf").write_bytes(letter)
    first = PdfReader(io.BytesIO(letter)).pages[0].mediabox
    assert abs(float(first.width) - 612) < 2 and abs(float(first.height) - 792) < 2
    no_script_errors(page)


# ---------------------------------------------------------------- thickness -> comparison


def test_thickness_change_changes_the_comparison(page, server_url, demo_project, artifacts):
    page.goto(f"{server_url}/projects/{demo_project}/compare?layout={LEAN}")
    before = gains_shown(page)

    # the change goes through the Ground model page's form, as a user makes it
    page.goto(f"{server_url}/projects/{demo_project}/ground")
    page.wait_for_selector("#ground")
    field = page.locator("#f-units-1-thickness_m-max")
    field.fill("12")
    page.locator("#f-units-1").get_by_role("button", name=re.compile("^Save")).click()
    page.wait_for_selector("#ground .notice-ok")
    shot(page, artifacts, "06-ground-edited")
    saved = httpx.get(f"{server_url}/api/projects/{demo_project}").json()["model"]
    assert saved["units"][1]["thickness_m"]["max"] == 12.0

    page.goto(f"{server_url}/projects/{demo_project}/compare?layout={LEAN}")
    after = gains_shown(page)
    assert len(after) == len(before)
    assert after != before
    shot(page, artifacts, "07-compare-after-thickness")
    no_script_errors(page)


# ---------------------------------------------------------------- add by clicking, undo


FIND_SPOT = """([id, wantInside]) => {
    const el = document.querySelector("." + id);
    const handle = window.ProbewiseMap.get(el);
    const ring = handle.data.site.coordinates[0];
    const inside = (x, y) => {
        let c = false;
        for (let i = 0, j = ring.length - 1; i < ring.length; j = i++) {
            const [xi, yi] = ring[i], [xj, yj] = ring[j];
            if ((yi > y) !== (yj > y) && x < ((xj - xi) * (y - yi)) / (yj - yi) + xi) c = !c;
        }
        return c;
    };
    const b = handle.data.bounds;
    const box = el.getBoundingClientRect();
    const clear = (px, py) => [[0, 0], [14, 0], [-14, 0], [0, 14], [0, -14]].every(([dx, dy]) => {
        const hit = document.elementFromPoint(box.left + px + dx, box.top + py + dy);
        return hit && el.contains(hit)
            && !hit.closest(".leaflet-marker-icon, .leaflet-tooltip, .leaflet-control")
            && !(hit.classList && hit.classList.contains("map-exclusion"));
    });
    for (let fy = 0.02; fy <= 0.98; fy += 0.04) {
        for (let fx = 0.02; fx <= 0.98; fx += 0.02) {
            const x = b[0] + fx * (b[2] - b[0]), y = b[1] + fy * (b[3] - b[1]);
            if (inside(x, y) !== wantInside) continue;
            const p = handle.map.latLngToContainerPoint(handle.toLatLng(x, y));
            if (p.x < 20 || p.y < 20 || p.x > box.width - 20 || p.y > box.height - 20) continue;
            if (clear(p.x, p.y)) return [p.x, p.y];
        }
    }
    return null;
}"""


def click_free_spot(page, map_id: str, *, inside: bool) -> None:
    """Click a spot of the map clear of every symbol, inside the site or outside it."""
    spot = page.evaluate(FIND_SPOT, [map_id, inside])
    assert spot, "no free spot on the map"
    page.locator(f".{map_id}").click(position={"x": spot[0], "y": spot[1]})


def test_add_a_probe_by_clicking_the_map_then_undo(page, server_url, demo_project, artifacts):
    page.goto(f"{server_url}/projects/{demo_project}/options?layout={LEAN}")
    wait_for_map(page, "options-map")
    markers = page.locator(".options-map .pw-probe-labelled")
    markers.first.wait_for()
    count = markers.count()
    revision = revision_shown(page)

    page.select_option("#add-method", "CPTu")
    click_free_spot(page, "options-map", inside=True)
    page.wait_for_function(
        "n => document.querySelectorAll('.options-map .pw-probe-labelled').length === n",
        arg=count + 1,
    )
    assert revision_shown(page) == revision + 1
    assert page.locator("#probes-table tbody th", has_text="CPTu-01").count() == 1
    shot(page, artifacts, "08-options-probe-added")

    # a click outside the site is refused with a message, nothing saved
    click_free_spot(page, "options-map", inside=False)
    page.wait_for_selector("#flash.flash-error")
    assert "outside the site" in page.locator("#flash").inner_text()
    assert revision_shown(page) == revision + 1
    # the browser logs the refused request (422) as a console error: that one is expected
    refused = [e for e in page.js_errors if "status of 422" in e and "/probes/add" in e]
    assert len(refused) == 1, page.js_errors
    page.js_errors.remove(refused[0])

    page.locator(".undo-button").click()
    page.wait_for_function(
        "n => document.querySelectorAll('.options-map .pw-probe-labelled').length === n",
        arg=count,
    )
    assert revision_shown(page) == revision + 2
    assert page.locator("#probes-table tbody th", has_text="CPTu-01").count() == 0
    shot(page, artifacts, "09-options-undone")
    no_script_errors(page)


def test_move_a_probe_by_dragging_it(page, server_url, demo_project):
    page.goto(f"{server_url}/projects/{demo_project}/options?layout={LEAN}")
    wait_for_map(page, "options-map")
    marker = page.locator(".options-map .pw-probe-labelled").first
    marker.wait_for()
    revision = revision_shown(page)
    x_before = page.locator("#probe-form-1-x").input_value()
    box = marker.bounding_box()
    page.mouse.move(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
    page.mouse.down()
    page.mouse.move(box["x"] + 40, box["y"] + 10, steps=8)
    page.mouse.up()
    page.wait_for_function(
        f"() => Number(document.querySelector('.current-revision').textContent) === {revision + 1}"
    )
    assert page.locator("#probe-form-1-x").input_value() != x_before
    no_script_errors(page)


# ---------------------------------------------------------------- the optimiser


def test_optimiser_with_progress_bar_and_new_layout(page, server_url, demo_project, artifacts):
    page.goto(f"{server_url}/projects/{demo_project}/options")
    wait_for_map(page, "options-map")
    page.fill("#optimiser-budget", "40000")
    page.fill("#optimiser-name", "Browser run")
    page.locator("#optimiser-start").click()
    page.wait_for_selector("progress.job-progress")
    shot(page, artifacts, "10-optimiser-running")
    # other requests answer while it runs
    assert httpx.get(f"{server_url}/projects/{demo_project}", timeout=60).status_code == 200
    page.wait_for_selector(".layout-name:text-is('Browser run')", timeout=OPTIMISER_WAIT_MS)
    assert page.locator(".layouts-table a", has_text="Browser run").count() == 1
    page.wait_for_selector(".job-done")
    page.wait_for_selector(".options-map .pw-probe-labelled")
    shot(page, artifacts, "11-optimiser-done")

    page.locator(".job-done a", has_text="Compare it").click()
    page.wait_for_selector("#ranking-table")
    assert page.locator("#ranking-table tr.is-chosen", has_text="Browser run").count() == 1
    no_script_errors(page)


# ---------------------------------------------------------------- a typed section


def test_typed_section_ends_move_the_line_on_the_map(page, server_url, demo_project):
    """Typing the two ends of a section and drawing it redraws the section figure and moves the
    line on the map to the typed ends (the figure's data-section carries them)."""
    page.goto(f"{server_url}/projects/{demo_project}/compare")
    page.wait_for_selector("#section-form")
    wait_for_map(page, "compare-map")
    page.wait_for_selector(".compare-map path.section-line")
    before = page.locator(".compare-map path.section-line").get_attribute("d")
    x1 = float(page.locator("#section-x1").input_value().replace(",", ""))
    y1 = float(page.locator("#section-y1").input_value().replace(",", ""))
    x2 = float(page.locator("#section-x2").input_value().replace(",", ""))
    y2 = float(page.locator("#section-y2").input_value().replace(",", ""))
    # a shorter line: the start moved halfway towards the end
    page.fill("#section-x1", f"{(x1 + x2) / 2:.1f}")
    page.fill("#section-y1", f"{(y1 + y2) / 2:.1f}")
    old_figure = page.locator("#section-figure").get_attribute("data-section")
    page.click("#section-form button[type=submit]")
    page.wait_for_function(
        "old => document.getElementById('section-figure').getAttribute('data-section') !== old",
        arg=old_figure,
    )
    page.wait_for_function(
        "old => { const p = document.querySelector('.compare-map path.section-line');"
        " return p && p.getAttribute('d') !== old; }",
        arg=before,
    )
    after = page.locator(".compare-map path.section-line").get_attribute("d")
    assert after != before
    no_script_errors(page)
