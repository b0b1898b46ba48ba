"""The researcher's journey in a real browser (Debian's chromium through Playwright) against waitress.

One module, one journey, as a new user would walk it: log in; upload a loadings-only export (refused,
texts missing) then the full workbook; read the diagnosis; edit a factor and an item; compose a round with
every task kind; add judges (one with e-mail and expertise, one anonymous code); read the plan; open the
round; print the invitations; answer as three judges (one without JavaScript); close; read the results and
download every export; then a second round with the first panel carried over, whose results compare the
two rounds. Screenshots of the study, round and results pages at 1280 and 360 px go to
artifacts/screenshots/researcher-*.png.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from tests.helpers_browser import (BROWSER_MARKS, SHOTS, WAIT, browser, expect, serve,  # noqa: F401
                                   sync_api)

pytestmark = BROWSER_MARKS

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_studies" / "community_orchards" / "solution"
PASSWORD = "correct horse battery"
ALL_TASKS = ("open_sort", "label_match", "relevance", "essentiality", "definition_fit", "naming")
EXPORT_TYPES = {"report.html": "text/html", "results.xlsx": "application/vnd.openxmlformats",
                "answers.csv": "text/csv", "answers-excel.csv": "text/csv", "results.json": "application/json",
                "methods.md": "text/markdown"}


@pytest.fixture(scope="module")
def site(tmp_path_factory):

    from labelstudy.project import init_project
    from labelstudy.web import create_app

    path = tmp_path_factory.mktemp("researcher-browser") / "p"
    init_project(path, password=PASSWORD)
    app = create_app(path, {"TESTING": True})
    with serve(app) as base:
        yield {"base": base, "app": app}


def context(browser, *, width=1280, js=True):
    ctx = browser.new_context(viewport={"width": width, "height": 900}, java_script_enabled=js,
                              accept_downloads=True)
    ctx.set_default_timeout(WAIT)
    ctx.set_default_navigation_timeout(WAIT)
    return ctx


# The outermost elements that stick out to the right of the viewport (tag.class and right edge).
WIDER_THAN_VIEWPORT = """() => {
  const w = document.documentElement.clientWidth, out = [];
  for (const el of document.querySelectorAll("body *")) {
    const r = el.getBoundingClientRect();
    if (r.right > w + 1 && !(el.parentElement && el.parentElement.getBoundingClientRect().right > w + 1))
      out.push(`${el.tagName.toLowerCase()}.${el.className} ${Math.round(r.right)}`);
  }
  return out.slice(0, 8);
}"""


def shoot(ctx, url: str, name: str, *, full_360: bool = True):
    """Screenshots of ``url`` at 1280 and 360 px (same session cookies as ``ctx``); full page unless
    ``full_360`` is false (then the first screen at 360 px: the results page is very long)."""
    SHOTS.mkdir(parents=True, exist_ok=True)
    for width in (1280, 360):
        page = ctx.new_page()
        page.set_viewport_size({"width": width, "height": 900})
        page.goto(url)
        page.screenshot(path=str(SHOTS / f"researcher-{name}-{width}.png"), full_page=full_360 or width > 360)
        if width == 360:   # nothing but the wide tables may scroll sideways
            overflow = page.evaluate("document.documentElement.scrollWidth - document.documentElement.clientWidth")
            wide = page.evaluate(WIDER_THAN_VIEWPORT)
            assert overflow <= 1, f"{name} page scrolls sideways at 360 px by {overflow} px: {wide}"
        page.close()


def flash(page):
    return page.locator(".flash")


# Sets every control of a task form: the i-th select or radio group gets its ((i + k) mod 3)-th choice
# (the first for the last judge, so judges agree often but not always); pile names for three piles.
FILL = """(form, k) => {
  const pick = (n, i) => (k === 2 ? 0 : (i + k) % Math.min(3, n));
  form.querySelectorAll("select[name^='v__']").forEach((s, i) => {
    const opts = [...s.options].filter(o => o.value);
    opts[pick(opts.length, i)].selected = true;
  });
  form.querySelectorAll("fieldset.unit").forEach((f, i) => {
    const rs = f.querySelectorAll("input[type=radio]");
    if (rs.length) rs[pick(rs.length, i)].checked = true;
  });
  ["Friends", "Skills", "Nature"].forEach((name, i) => {
    const box = form.querySelector(`input[name='v__pile:${i + 1}']`);
    if (box) box.value = name;
  });
}"""


def answer_as_judge(browser, link: str, k: int, *, js: bool = True):
    """Answer every task of the judge form behind ``link`` (the k-th judge varies the answers) and submit."""
    ctx = context(browser, js=js)
    page = ctx.new_page()
    try:
        page.goto(link)
        page.get_by_role("button", name="I agree, start").click()
        page.wait_for_url("**/task/1")
        for _ in range(12):
            if "/task/" not in page.url:
                break
            if js:
                page.locator('#task-form[data-js-ready="1"]').wait_for(state="attached")
            # one real answer per page (with JavaScript: wait until it shows as saved), then the rest set
            # in one call; the form post saves every field. The real answer is the one FILL would give.
            first = page.locator("#task-form [data-key]").filter(
                has=page.locator("input[type=radio], select")).first
            radios = first.locator("input[type=radio]")
            if radios.count():
                radios.nth(0 if k == 2 else k % min(3, radios.count())).check()
            else:
                sel = first.locator("select")
                n = sel.locator("option").count() - 1   # the first option is the empty prompt
                sel.select_option(index=1 + (0 if k == 2 else k % min(3, n)))
            if js:
                expect(first.locator(".save-state")).to_have_text("Saved")
            page.locator("#task-form").evaluate(FILL, k)
            with page.expect_navigation():
                page.get_by_role("button", name="Save and continue").click()
            assert "stale" not in page.url, f"judge {k}: an answer given on this device came back as stale"
        assert page.url.endswith("/review"), page.url   # no task page came back with a warning
        page.get_by_role("button", name="Submit my answers").click()
        page.wait_for_url("**/thanks")
    finally:
        ctx.close()


def test_researcher_journey(browser, site, tmp_path):
    base = site["base"]
    ctx = context(browser)
    page = ctx.new_page()
    # 1. log in
    page.goto(f"{base}/r/")
    page.wait_for_url("**/r/login**")
    page.fill("#password", PASSWORD)
    page.get_by_role("button", name="Log in").click()
    page.wait_for_url(f"{base}/r/")


    # 2. a loadings-only export is refused with a message naming the missing texts
    page.goto(f"{base}/r/studies/new")
    page.fill("input[name=title]", "Orchard motives")
    page.set_input_files("input[type=file]", str(SAMPLES / "orchard_loadings_only.csv"))
    page.get_by_role("button", name="Import").click()
    expect(page.locator(".error")).to_contain_text("orchard_loadings_only.csv: no item text column")
    expect(page.locator(".error")).to_contain_text("Nothing was stored")
    SHOTS.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(SHOTS / "researcher-refused-1280.png"), full_page=True)
    page.set_input_files("input[type=file]", str(SAMPLES / "orchard_solution.xlsx"))
    page.get_by_role("button", name="Import").click()
    page.wait_for_url("**/r/studies/*")
    study_url = page.url
    expect(flash(page)).to_contain_text("imported")

    # edit a factor's name and definition, then an item's text
    row = page.locator("#factors tbody tr").first
    fid = row.get_attribute("id").removeprefix("factor-")
    row.locator("summary").click()
    row.locator("input[name=name]").fill("Shared harvest")
    row.locator("textarea[name=definition]").fill("Enjoying picking and sharing the fruit with others.")
    row.get_by_role("button", name=f"Save factor {fid}").click()
    expect(flash(page)).to_contain_text(f"Factor {fid} saved")
    expect(page.locator(f"#factor-{fid}")).to_contain_text("Shared harvest")
    item = page.locator("#items tbody tr").first
    iid = item.get_attribute("id").removeprefix("item-")
    item.locator("summary").click()
    item.locator("textarea[name=text]").fill("I look forward to the apple harvest every autumn.")
    item.get_by_role("button", name=f"Save item {iid}").click()
    expect(flash(page)).to_contain_text(f"Item {iid} saved")
    expect(page.locator(f"#item-{iid}")).to_contain_text("apple harvest every autumn")

    # 3. compose a round with every task kind, label matching showing names only
    page.goto(study_url)
    page.get_by_role("link", name="Compose a new round").click()
    for kind in ALL_TASKS:
        page.check(f"#task_{kind}")
    page.check("input[name=show][value=name]")
    page.locator("textarea[name^=candidates_]").first.fill("Fruit sharing\nHarvest fun")
    page.get_by_role("button", name="Create draft round").click()
    page.wait_for_url("**/r/rounds/*")
    round1 = page.url.split("#")[0]
    expect(flash(page)).to_contain_text("draft")
    page.fill("#judges-text", "Rowan Quince, rowan@example.org, pomology\nJ02\nJ03, soil ecology")
    page.get_by_role("button", name="Add judges").click()
    expect(flash(page)).to_contain_text("3 judges added")
    expect(page.locator(".plan-messages li").first).to_be_visible()
    page.get_by_role("button", name="Open round").click()
    expect(flash(page)).to_contain_text("opened")
    links = page.locator("input.link").evaluate_all("xs => xs.map(x => x.value)")
    assert len(links) == 3
    page.get_by_role("link", name="Printable invitations").click()
    expect(page.locator("svg")).to_have_count(3)
    page.go_back()

    # 4. three judges answer, one without JavaScript
    for k, link in enumerate(links):
        answer_as_judge(browser, link, k, js=(k != 1))
    page.reload()
    expect(page.locator(".judge-status").filter(has_text="submitted")).to_have_count(3)

    # 5. close, results, every export
    page.get_by_role("button", name="Close round").click()
    expect(flash(page)).to_contain_text("closed")
    shoot(ctx, round1, "round")
    page.get_by_role("link", name="Results").click()
    page.wait_for_url("**/results")
    results1 = page.url
    for name, ctype in EXPORT_TYPES.items():
        resp = ctx.request.get(f"{round1}/export/{name}")
        assert resp.status == 200, (name, resp.status)
        assert resp.headers["content-type"].startswith(ctype), (name, resp.headers["content-type"])
        if name == "results.json":
            json.loads(resp.body())
    with page.expect_download() as dl:
        page.get_by_role("link", name="report.html").click()
    report = tmp_path / "report.html"
    dl.value.save_as(report)
    page.goto(report.as_uri())
    expect(page.locator("h1")).to_contain_text("round 1")
    expect(page.locator("table").first).to_be_visible()
    shoot(ctx, results1, "results", full_360=False)
    shoot(ctx, study_url, "study")

    # 6. round 2 with the round-1 panel carried over
    page.goto(study_url)
    page.get_by_role("link", name="Compose a new round").click()
    page.get_by_role("button", name="Create draft round").click()
    page.wait_for_url("**/r/rounds/*")
    round2 = page.url.split("#")[0]
    page.get_by_role("button", name="Invite that panel").click()
    expect(flash(page)).to_have_text("3 judges from round 1 invited with new links.")
    page.get_by_role("button", name="Open round").click()
    links2 = page.locator("input.link").evaluate_all("xs => xs.map(x => x.value)")
    assert len(links2) == 3 and not set(links2) & set(links)
    for k, link in enumerate(links2[:2]):
        answer_as_judge(browser, link, k + 1)
    page.get_by_role("link", name="Results").click()
    page.wait_for_url("**/results")
    expect(page.locator("#cp-h")).to_have_text("Round 2 compared with round 1")
    expect(page.locator("#cp-h + p + .table-wrap table tbody tr").first).to_be_visible()
    # from the results back to the study, whose round list links both rounds and their results
    page.get_by_role("navigation", name="Breadcrumb").get_by_role("link", name="Orchard motives").click()
    page.wait_for_url(study_url)
    expect(page.locator("#rounds li")).to_have_count(2)
    expect(page.locator("#rounds").get_by_role("link", name="results")).to_have_count(2)
    ctx.close()


def test_the_plan_follows_the_judges_being_typed_in(browser, site):
    """While the researcher enters the panel, the round page says what that panel size can establish."""
    from labelstudy.agreement import plan_panel
    from labelstudy.solution import load_solution

    store = site["app"].extensions["labelstudy_store"]
    solution = load_solution(SAMPLES / "orchard_solution.xlsx")
    sid = store.create_study("Panel planning", solution)
    rid = store.create_round(sid, tasks=[("label_match", {})], seed=17)
    store.add_judges(rid, [("Ada", "", ""), ("Ben", "", "")])
    ctx = context(browser)
    page = ctx.new_page()
    try:
        page.goto(f"{site['base']}/r/login")
        page.fill("#password", PASSWORD)
        page.get_by_role("button", name="Log in").click()
        page.goto(f"{site['base']}/r/rounds/{rid}")
        expect(page.locator("#plan-for")).to_contain_text("For the 2 active judges")
        page.fill("#judges-text", "Cara\nDev\n\nEli\nFay")
        expect(page.locator("#plan-for")).to_contain_text("For a panel of 6 judges")
        expected = plan_panel(6, len(solution.items), len(solution.factors), n_sim=200, seed=17).messages
        expect(page.locator("#plan-messages li").first).to_have_text(expected[0])
        assert page.locator("#plan-messages li").all_inner_texts() == list(expected)
    finally:
        ctx.close()
