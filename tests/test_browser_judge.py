"""The judge form in a real browser (Debian's chromium through Playwright) against a real waitress server.

Covers: the whole flow with JavaScript (autosave, per-item saved state, reload keeps every answer, submit,
the researcher's dashboard says "submitted"), the same without JavaScript, keyboard-only radio use,
offline saving with retry, a change from another device, and 360 px layout with screenshots of every task
kind at 360 and 1280 px (artifacts/screenshots/).
"""

from __future__ import annotations


import pytest

from tests.helpers_judge import ALL_KINDS, PASSWORD, build_round, make_app
from tests.helpers_browser import (BROWSER_MARKS, SHOTS, WAIT, browser, expect, serve,  # noqa: F401
                                   sync_api)

pytestmark = BROWSER_MARKS



@pytest.fixture(scope="module")
def site(tmp_path_factory):

    b = build_round(tmp_path_factory.mktemp("judge-browser"), tasks=ALL_KINDS, judges=7)
    app = make_app(b.path)
    invs = {inv["display_name"]: inv for inv in b.store.invitations(b.round_id)}
    with serve(app) as base:
        yield {"base": base, "built": b, "invs": invs}
    b.store.close()


def new_page(browser, *, width=1280, height=900, js=True):
    ctx = browser.new_context(viewport={"width": width, "height": height}, java_script_enabled=js)
    ctx.set_default_timeout(WAIT)
    ctx.set_default_navigation_timeout(WAIT)
    return ctx, ctx.new_page()


def start(page, site, name):
    inv = site["invs"][name]
    page.goto(f"{site['base']}/j/{inv['token']}")
    page.get_by_role("button", name="I agree, start").click()
    page.wait_for_url("**/task/1")
    return inv


def js_ready(page):
    page.locator('#task-form[data-js-ready="1"]').wait_for(state="attached")


def stored(site, judge_id):
    b = site["built"]
    return {(a["task_id"], a["item"]): a for a in b.store.judge_answers(judge_id, b.round_id)}


def task_ids(site):
    return [t["id"] for t in site["built"].store.tasks(site["built"].round_id)]


# ------------------------------------------------------------------------------------------ the whole flow
def test_judge_flow_with_javascript_then_dashboard(browser, site):
    ctx, page = new_page(browser)
    try:
        inv = start(page, site, "Judge A")
        tids = task_ids(site)
        js_ready(page)
        expect(page.locator("#progress-text")).to_contain_text("0 of")
        # open sort: every statement into one of three piles, then name the piles
        selects = page.locator("select[name^='v__']")
        n_items = selects.count()
        assert n_items == 9
        for i in range(n_items):
            selects.nth(i).select_option(str(i % 3 + 1))
        for i in range(n_items):
            unit = selects.nth(i).locator("xpath=ancestor::*[@data-key][1]")
            expect(unit.locator(".save-state")).to_have_text("Saved")
        for n, name in ((1, "Friends"), (2, "Skills"), (3, "Nature")):
            box = page.locator(f"input[name='v__pile:{n}']")
            box.fill(name)
            box.blur()
            expect(page.locator(f"[data-key='pile:{n}'] .save-state")).to_have_text("Saved")
        expect(page.locator(".pile-count[data-pile='1']")).to_have_text("(3)")
        expect(page.locator("#progress-count")).to_have_text("9")
        got = stored(site, inv["judge_id"])
        assert sum(1 for (t, k) in got if t == tids[0] and not k.startswith("pile:")) == 9
        assert got[(tids[0], "pile:2")]["value"] == "Skills"
        assert all(a["seconds"] is not None for a in site["built"].store.answers(site["built"].round_id)
                   .query(f"judge_id == {inv['judge_id']}").to_dict("records"))

        # label matching: first option for every statement
        page.get_by_role("link", name="Task 2").click()
        js_ready(page)
        groups = page.locator("fieldset.unit")
        assert groups.count() == 9
        for i in range(groups.count()):
            groups.nth(i).locator("input[type=radio]").first.check()
        for i in range(groups.count()):
            expect(groups.nth(i).locator(".save-state")).to_have_text("Saved")
        # a comment on one statement
        groups.nth(0).locator("summary").click()
        groups.nth(0).locator("textarea").fill("Could also be learning.")
        groups.nth(0).locator("textarea").blur()

        # relevance: answer half, reload midway, everything is still there with its saved state
        page.get_by_role("link", name="Task 3").click()
        js_ready(page)
        rel = page.locator("fieldset.unit")
        for i in range(5):
            rel.nth(i).locator("input[value='4']").check()
        for i in range(5):
            expect(rel.nth(i).locator(".save-state")).to_have_text("Saved")
        page.reload()
        js_ready(page)
        rel = page.locator("fieldset.unit")
        for i in range(5):
            expect(rel.nth(i).locator("input[value='4']")).to_be_checked()
            expect(rel.nth(i).locator(".save-state")).to_have_text("Saved")
        for i in range(5, 9):
            rel.nth(i).locator("input[value='3']").check()
            expect(rel.nth(i).locator(".save-state")).to_have_text("Saved")
        page.go_back()          # task 2 again: its answers and comment are there
        js_ready(page)
        expect(page.locator("fieldset.unit").nth(0).locator("textarea")).to_have_value("Could also be learning.")
        expect(page.locator("fieldset.unit").nth(8).locator("input[type=radio]").first).to_be_checked()
        page.go_back()
        js_ready(page)
        expect(page.locator("select[name^='v__']").nth(4)).to_have_value("2")
        expect(page.locator("input[name='v__pile:3']")).to_have_value("Nature")

        # review and submit (the other tasks stay unanswered: listed as missing)
        page.get_by_role("link", name="Review").click()
        expect(page.locator("h1")).to_have_text("Review and submit")
        expect(page.locator("ul.missing").first).to_be_visible()
        page.get_by_role("button", name="Submit my answers").click()
        page.wait_for_url("**/thanks")
        expect(page.locator("main")).to_contain_text("Your answers were submitted")
        assert site["built"].store.invitation_for(inv["judge_id"], site["built"].round_id)["submitted_at"]

        # the researcher's dashboard
        page.goto(f"{site['base']}/r/login")
        page.locator("#password").fill(PASSWORD)
        page.get_by_role("button", name="Log in").click()
        page.goto(f"{site['base']}/r/rounds/{site['built'].round_id}")
        row = page.locator("tr", has_text="Judge A")
        expect(row.first).to_contain_text("submitted")
    finally:
        ctx.close()


def test_judge_flow_without_javascript(browser, site):
    ctx, page = new_page(browser, js=False)
    try:
        inv = start(page, site, "Judge B")
        tids = task_ids(site)
        page.goto(page.url.replace("/task/1", "/task/3"))
        rel = page.locator("fieldset.unit")
        assert rel.count() == 9
        for i in range(9):
            rel.nth(i).locator("input[value='2']").check()
        rel.nth(0).locator("summary").click()
        rel.nth(0).locator("textarea").fill("Wording is vague.")
        page.get_by_role("button", name="Save and continue").click()
        page.wait_for_url("**/task/4")
        got = stored(site, inv["judge_id"])
        assert sorted(a["value"] for (t, _), a in got.items() if t == tids[2]) == ["2"] * 9
        assert any(a["comment"] == "Wording is vague." for a in got.values())
        page.go_back()
        page.reload()
        expect(page.locator("fieldset.unit").nth(3).locator("input[value='2']")).to_be_checked()
        expect(page.locator("fieldset.unit").nth(3).locator(".save-state")).to_have_text("Saved")
    finally:
        ctx.close()


def test_keyboard_only_radio_group(browser, site):
    ctx, page = new_page(browser)
    try:
        inv = start(page, site, "Judge C")
        page.goto(page.url.replace("/task/1", "/task/2"))
        js_ready(page)
        group = page.locator("fieldset.unit").first
        key = group.get_attribute("data-key")
        radios = group.locator("input[type=radio]")
        radios.first.focus()
        page.keyboard.press("Space")
        expect(radios.first).to_be_checked()
        page.keyboard.press("ArrowDown")
        expect(radios.nth(1)).to_be_checked()
        expect(radios.nth(1)).to_be_focused()
        page.keyboard.press("ArrowDown")
        page.keyboard.press("Space")
        expect(radios.nth(2)).to_be_checked()
        expect(group.locator(".save-state")).to_have_text("Saved")
        # focus is visible: the focused radio's option gets an outline
        outline = page.evaluate("() => getComputedStyle(document.activeElement.closest('.choice')).outlineStyle")
        assert outline == "solid"
        value = radios.nth(2).get_attribute("value")
        assert stored(site, inv["judge_id"])[(task_ids(site)[1], key)]["value"] == value
    finally:
        ctx.close()


def test_offline_answers_are_kept_and_sent_later_and_other_device_wins(browser, site):
    ctx, page = new_page(browser)
    try:
        inv = start(page, site, "Judge D")
        page.goto(page.url.replace("/task/1", "/task/3"))
        js_ready(page)
        unit = page.locator("fieldset.unit").first
        key = unit.get_attribute("data-key")
        tid = task_ids(site)[2]
        ctx.set_offline(True)
        unit.locator("input[value='1']").check()
        expect(unit.locator(".save-state")).to_have_text("Not saved, retrying")
        local = page.evaluate("(k) => localStorage.getItem(k)", f"labelstudy:{inv['token']}:{tid}:{key}")
        assert local and '"value":"1"' in local
        assert (tid, key) not in stored(site, inv["judge_id"])
        ctx.set_offline(False)
        expect(unit.locator(".save-state")).to_have_text("Saved")
        assert stored(site, inv["judge_id"])[(tid, key)]["value"] == "1"
        assert page.evaluate("(k) => localStorage.getItem(k)", f"labelstudy:{inv['token']}:{tid}:{key}") is None
        # another device saves a newer answer; when this tab comes back into view it takes it
        rev = stored(site, inv["judge_id"])[(tid, key)]["revision"]
        site["built"].store.save_answer(inv["judge_id"], site["built"].round_id, tid, key, "3", "",
                                        revision=rev + 1)
        page.evaluate("() => document.dispatchEvent(new Event('visibilitychange'))")
        expect(unit.locator(".save-state")).to_have_text("Changed on another device: updated")
        expect(unit.locator("input[value='3']")).to_be_checked()
    finally:
        ctx.close()


def test_every_task_kind_at_360_and_1280_px(browser, site):
    SHOTS.mkdir(parents=True, exist_ok=True)
    kinds = [k for k, _ in ALL_KINDS]
    ctx, page = new_page(browser, width=360, height=780)
    try:
        inv = start(page, site, "Judge E")
        base = page.url.rsplit("/", 1)[0]
        for n, kind in enumerate(kinds, start=1):
            page.set_viewport_size({"width": 360, "height": 780})
            page.goto(f"{base}/{n}")
            js_ready(page)
            if n == 3:   # one answered statement, to show the selected and saved look
                page.locator("fieldset.unit").first.locator("input[value='3']").check()
                expect(page.locator("fieldset.unit").first.locator(".save-state")).to_have_text("Saved")
            width = page.evaluate("() => document.documentElement.scrollWidth")
            assert width <= 360, f"task {n} ({kind}) scrolls sideways at 360 px: {width} px wide"
            page.screenshot(path=str(SHOTS / f"judge-{n}-{kind}-360.png"), full_page=True)
            page.set_viewport_size({"width": 1280, "height": 900})
            page.screenshot(path=str(SHOTS / f"judge-{n}-{kind}-1280.png"), full_page=True)
        for name in ("review",):
            page.set_viewport_size({"width": 360, "height": 780})
            page.goto(f"{base.rsplit('/', 1)[0]}/{name}")
            assert page.evaluate("() => document.documentElement.scrollWidth") <= 360
            page.screenshot(path=str(SHOTS / f"judge-{name}-360.png"), full_page=True)
        page.goto(f"{site['base']}/j/{inv['token']}")
        assert page.evaluate("() => document.documentElement.scrollWidth") <= 360
        page.screenshot(path=str(SHOTS / "judge-welcome-360.png"), full_page=True)
    finally:
        ctx.close()


# ------------------------------------------------------------------------------- save while saves are in flight
def test_save_and_continue_while_a_save_is_in_flight_keeps_the_latest_answer(browser, site):
    """The judge changes an answer twice and presses "Save and continue" while the first change's save has
    reached the server but not answered yet: the form's answer is the newest and must win, not be reported
    as changed on another device."""
    ctx, page = new_page(browser)
    held = []
    try:
        inv = start(page, site, "Judge F")
        tids = task_ids(site)
        page.get_by_role("link", name="Task 2").click()
        js_ready(page)
        unit = page.locator("fieldset.unit").first
        key = unit.get_attribute("data-key")
        radios = unit.locator("input[type=radio]")
        radios.nth(0).check()
        expect(unit.locator(".save-state")).to_have_text("Saved")

        def hold(route):            # the save reaches the server and commits; its answer is held back
            held.append((route, route.fetch()))

        page.route("**/save", hold)
        radios.nth(1).check()
        for _ in range(100):
            if held:
                break
            page.wait_for_timeout(50)
        assert held, "the second save never left the page"
        latest = radios.nth(2).get_attribute("value")
        radios.nth(2).check()       # queued behind the save in flight
        page.get_by_role("button", name="Save and continue").click()
        page.wait_for_url("**/task/3*")
        assert "stale" not in page.url
        answer = stored(site, inv["judge_id"])[(tids[1], key)]
        assert answer["value"] == latest and answer["revision"] == 3
    finally:
        for route, response in held:
            try:
                route.fulfill(response=response)
            except Exception:       # the page has moved on; nothing waits for this answer any more
                pass
        ctx.close()


# ------------------------------------------------------------------------- no layout jump under the pointer
def test_a_click_on_save_and_continue_right_after_typing_is_not_lost(browser, site):
    """Pressing the button blurs the text field being typed in; the saved state that appears then must not
    move the button away from under the pointer between mouse down and mouse up."""
    ctx, page = new_page(browser, width=360, height=740)
    try:
        start(page, site, "Judge G")
        js_ready(page)
        for sel in page.locator("select[name^='v__']").all():
            sel.select_option("1")
        box = page.locator("input[name='v__pile:1']")
        box.fill("Leftovers")                     # focus stays in the field, as after typing
        button = page.get_by_role("button", name="Save and continue")
        button.scroll_into_view_if_needed()
        before = button.bounding_box()
        page.mouse.move(before["x"] + before["width"] / 2, before["y"] + before["height"] / 2)
        page.mouse.down()                         # the field loses focus here
        after = button.bounding_box()
        page.mouse.up()
        assert abs(after["y"] - before["y"]) < 1, (before, after)
        page.wait_for_url("**/task/2")
    finally:
        ctx.close()
