"""Accessibility checks (WCAG 2.2 AA, mechanical part) of every judge page kind in a real browser.

Debian's chromium through Playwright against a waitress server on 127.0.0.1. Pages: welcome with consent,
welcome when resuming, every task kind (open sort, label matching with show=name/definition/both, relevance,
essentiality, definition fit, naming), a task page with field errors, review, thanks, revoked, unavailable.

On every page: <html lang>, a non-empty <title>, exactly one h1, every control has a programmatic name,
every radio sits in a fieldset with a legend, id references resolve, a field error is tied to its control
(aria-describedby + aria-invalid), targets are at least 24x24 CSS px (WCAG 2.5.8; links inside running
text are the inline exception), text contrast is at least 4.5:1 (3:1 for large text; WCAG 1.4.3, relative
luminance formula of WCAG 2.x), no sideways scrolling at 360 px and at 320 px (reflow, WCAG 1.4.10), and
every element reached with Tab shows a focus indicator (WCAG 2.4.7) and Tab never gets stuck.
Behaviour: a whole task done with the keyboard alone (Tab, arrow keys, Space, Enter, the comment
disclosure); save announcements go through one polite live region with one settled message per save;
answers given offline survive closing the tab and are sent when the page is opened again online.
Screenshots: artifacts/screenshots/a11y-*.png.
"""

from __future__ import annotations


import pytest

from tests.helpers_judge import build_round, make_app
from tests.helpers_browser import (BROWSER_MARKS, SHOTS, WAIT, browser, expect, serve,  # noqa: F401
                                   sync_api)

pytestmark = BROWSER_MARKS


TASKS = [("open_sort", {"max_piles": 4}), ("label_match", {"show": "name"}),
         ("label_match", {"show": "definition"}), ("label_match", {"show": "both"}), ("relevance", {}),
         ("essentiality", {}), ("definition_fit", {}),
         ("naming", {"candidates": {"F1": ["Community"], "F2": ["Skills"], "F3": ["Stewardship"]}})]
KIND_NAMES = ["open_sort", "label_name", "label_definition", "label_both", "relevance", "essentiality",
              "definition_fit", "naming"]

SHOT_PAGES = {"welcome", "task-1-open_sort", "task-2-label_name", "task-5-relevance", "task-7-definition_fit",
              "task-8-naming", "review", "thanks", "revoked"}
# WCAG 2.2 success criterion 1.4.3 (contrast minimum): 4.5:1, large text (>= 24 px, or >= 18.66 px bold) 3:1.
MIN_CONTRAST, MIN_CONTRAST_LARGE = 4.5, 3.0
# WCAG 2.2 success criterion 2.5.8 (target size minimum): 24 by 24 CSS pixels.
MIN_TARGET = 24

AUDIT_JS = r"""
(opts) => {
  opts = opts || {};
  const out = {problems: [], targets: [], contrast: []};
  const P = (m) => out.problems.push(m);
  const desc = (el) => el.tagName.toLowerCase() + (el.id ? '#' + el.id : '') +
      (el.name ? '[name=' + el.name + ']' : '') + ' "' + (el.textContent || '').trim().slice(0, 40) + '"';
  if (!(document.documentElement.getAttribute('lang') || '').trim()) P('html has no lang');
  if (!document.title.trim()) P('empty <title>');
  const h1 = document.querySelectorAll('h1');
  if (h1.length !== 1) P(h1.length + ' h1 elements');
  const ids = {};
  document.querySelectorAll('[id]').forEach((el) => { ids[el.id] = (ids[el.id] || 0) + 1; });
  Object.keys(ids).forEach((k) => { if (ids[k] > 1) P('duplicate id ' + k); });
  const refText = (list) => list.split(/\s+/).filter(Boolean).map((id) => {
    const r = document.getElementById(id);
    if (!r) { P('reference to missing id ' + id); return ''; }
    return r.textContent; }).join(' ');
  document.querySelectorAll('[aria-describedby],[aria-labelledby]').forEach((el) => {
    refText(el.getAttribute('aria-describedby') || ''); refText(el.getAttribute('aria-labelledby') || ''); });
  const accName = (el) => {
    if (el.getAttribute('aria-labelledby')) return refText(el.getAttribute('aria-labelledby'));
    if (el.getAttribute('aria-label')) return el.getAttribute('aria-label');
    if (el.labels && el.labels.length) return Array.from(el.labels).map((l) => l.textContent).join(' ');
    if (['BUTTON', 'A', 'SUMMARY'].includes(el.tagName)) return el.textContent;
    return el.getAttribute('title') || '';
  };
  const controls = document.querySelectorAll(
    'input:not([type=hidden]), select, textarea, button, a[href], summary, progress');
  controls.forEach((el) => {
    if (!accName(el).trim()) P('no accessible name: ' + desc(el));
    if (el.type === 'radio') {
      const fs = el.closest('fieldset');
      const lg = fs && fs.querySelector(':scope > legend');
      if (!lg || !lg.textContent.trim()) P('radio outside a fieldset with a legend: ' + desc(el));
      const mates = document.getElementsByName(el.name);
      Array.from(mates).forEach((m) => { if (m.closest('fieldset') !== fs) P('radio group split: ' + el.name); });
    }
  });
  // a field error must be tied to its control
  document.querySelectorAll('.field-error').forEach((err) => {
    if (!err.id) { P('field error without id'); return; }
    const unit = err.closest('[data-key]');
    const inputs = unit ? unit.querySelectorAll('input:not([type=hidden]), select') : [];
    if (!inputs.length) P('field error outside a unit: ' + err.id);
    inputs.forEach((c) => {
      if (c.getAttribute('aria-invalid') !== 'true') P('control with an error lacks aria-invalid: ' + desc(c));
      const holders = [c, c.closest('fieldset')].filter(Boolean);
      const tied = holders.some((h) => (h.getAttribute('aria-describedby') || '').split(/\s+/).includes(err.id));
      if (!tied) P('error ' + err.id + ' is not in aria-describedby of ' + desc(c));
    });
  });
  // live regions: the per-question states are not live; one page-level polite region speaks
  out.live = Array.from(document.querySelectorAll('[aria-live], [role=status], [role=alert]'))
    .map((el) => el.id || el.className);
  // targets (WCAG 2.5.8); inline links inside a sentence are exempt
  const visible = (el) => {
    const r = el.getBoundingClientRect(), s = getComputedStyle(el);
    return r.width > 1 && r.height > 1 && s.visibility !== 'hidden' && s.display !== 'none' &&
      r.left > -500 && !el.closest('.sr-only');
  };
  const inSentence = (el) => {
    if (el.tagName !== 'A' || getComputedStyle(el).display !== 'inline') return false;
    const parentText = (el.parentElement.textContent || '').replace(/\s+/g, ' ').trim();
    return parentText.length > (el.textContent || '').trim().length + 3;
  };
  controls.forEach((el) => {
    if (el.tagName === 'PROGRESS' || !visible(el) || inSentence(el)) return;
    const r = el.getBoundingClientRect();
    out.targets.push({what: desc(el), w: r.width, h: r.height});
  });
  // contrast (WCAG 2.x relative luminance)
  const parse = (c) => { const m = c.match(/rgba?\(([^)]+)\)/); if (!m) return null;
    const p = m[1].split(/[ ,\/]+/).filter(Boolean).map(Number); return [p[0], p[1], p[2], p.length > 3 ? p[3] : 1]; };
  const lum = (rgb) => { const f = (v) => { v /= 255; return v <= 0.03928 ? v / 12.92 : Math.pow((v + 0.055) / 1.055, 2.4); };
    return 0.2126 * f(rgb[0]) + 0.7152 * f(rgb[1]) + 0.0722 * f(rgb[2]); };
  const bgOf = (el) => {
    const layers = [];
    for (let e = el; e; e = e.parentElement) {
      const c = parse(getComputedStyle(e).backgroundColor);
      if (c && c[3] > 0) { layers.push(c); if (c[3] >= 1) break; }
    }
    let bg = [255, 255, 255];
    for (let i = layers.length - 1; i >= 0; i--) {
      const c = layers[i]; bg = [0, 1, 2].map((k) => c[k] * c[3] + bg[k] * (1 - c[3]));
    }
    return bg;
  };
  const walker = document.createTreeWalker(opts.targetsOnly ? document.createElement('i') : document.body,
                                          NodeFilter.SHOW_TEXT);
  const seen = new Set();
  for (let n = walker.nextNode(); n; n = walker.nextNode()) {
    const el = n.parentElement;
    if (!n.textContent.trim() || seen.has(el) || !visible(el)) continue;
    seen.add(el);
    if (el.closest(':disabled, [disabled], option, script')) continue;
    const s = getComputedStyle(el), fg = parse(s.color);
    let opacity = 1;
    for (let e = el; e; e = e.parentElement) opacity *= Number(getComputedStyle(e).opacity);
    const bg = bgOf(el);
    const a = fg[3] * opacity;
    const fgm = [0, 1, 2].map((k) => fg[k] * a + bg[k] * (1 - a));
    const L1 = lum(fgm), L2 = lum(bg);
    const ratio = (Math.max(L1, L2) + 0.05) / (Math.min(L1, L2) + 0.05);
    const size = parseFloat(s.fontSize), bold = Number(s.fontWeight) >= 700;
    const large = size >= 24 || (bold && size >= 18.66);
    out.contrast.push({what: desc(el), ratio: Math.round(ratio * 100) / 100, large: large});
  }
  out.scroll = document.documentElement.scrollWidth;
  return out;
}
"""

FOCUS_JS = r"""
(el) => {
  el = el || document.activeElement;
  if (!el || el === document.body) return {tag: 'BODY'};
  const shown = (e) => { const s = getComputedStyle(e);
    return (s.outlineStyle !== 'none' && parseFloat(s.outlineWidth) >= 2) || (s.boxShadow && s.boxShadow !== 'none'); };
  const holder = (el.type === 'radio' || el.type === 'checkbox') ? (el.closest('label') || el) : el;
  const r = holder.getBoundingClientRect();
  return {tag: el.tagName, id: el.id, at: Array.prototype.indexOf.call(document.querySelectorAll('*'), el), name: el.name || '', text: (el.textContent || '').trim().slice(0, 30),
          shown: shown(holder) || shown(el), onscreen: r.bottom > 0 && r.top < innerHeight && r.right > 0};
}
"""


@pytest.fixture(scope="module")
def site(tmp_path_factory):

    b = build_round(tmp_path_factory.mktemp("a11y"), tasks=TASKS, judges=8)
    store, rid = b.store, b.round_id
    invs = {inv["display_name"]: inv for inv in store.invitations(rid)}
    for name in ("Judge B", "Judge C", "Judge E", "Judge F", "Judge G"):
        store.record_consent(invs[name]["judge_id"], rid)
    store.submit(invs["Judge C"]["judge_id"], rid)
    store.revoke(invs["Judge D"]["judge_id"], rid)
    app = make_app(b.path)
    with serve(app) as base:
        yield {"base": base, "built": b, "invs": invs}
    store.close()


def new_page(browser, width=1280, height=900):
    ctx = browser.new_context(viewport={"width": width, "height": height})
    ctx.set_default_timeout(WAIT)
    ctx.set_default_navigation_timeout(WAIT)
    return ctx, ctx.new_page()


def url(site, name, rest=""):
    return f"{site['base']}/j/{site['invs'][name]['token']}{rest}"


def js_ready(page):
    if page.locator("#task-form").count() and page.locator("#task-form").get_attribute("data-readonly") != "1":
        page.locator('#task-form[data-js-ready="1"]').wait_for(state="attached")


def pages(site):
    """(label, url) of every judge page kind."""
    out = [("welcome", url(site, "Judge A")), ("resume", url(site, "Judge B"))]
    out += [(f"task-{n}-{k}", url(site, "Judge B", f"/task/{n}")) for n, k in enumerate(KIND_NAMES, start=1)]
    out += [("review", url(site, "Judge B", "/review")), ("thanks", url(site, "Judge C", "/thanks")),
            ("submitted-review", url(site, "Judge C", "/review")), ("revoked", url(site, "Judge D")),
            ("unavailable", f"{site['base']}/j/no-such-link-0000")]
    return out


def audit(page, label, targets_only=False) -> list[str]:
    res = page.evaluate(AUDIT_JS, {"targetsOnly": targets_only})
    problems = [f"{label}: {p}" for p in res["problems"]]
    for t in res["targets"]:
        if t["w"] < MIN_TARGET - 0.01 or t["h"] < MIN_TARGET - 0.01:
            problems.append(f"{label}: target {t['what']} is {t['w']:.1f}x{t['h']:.1f} px")
    for c in res["contrast"]:
        need = MIN_CONTRAST_LARGE if c["large"] else MIN_CONTRAST
        if c["ratio"] < need:
            problems.append(f"{label}: contrast {c['ratio']} < {need} for {c['what']}")
    if len(res["live"]) > 3:
        problems.append(f"{label}: {len(res['live'])} live regions (chatty): {res['live'][:5]}")
    return problems


def test_contrast_function_matches_published_values(browser):
    """The contrast code itself: black on white is 21:1, #767676 on white 4.54:1 (WCAG 2.x formula)."""
    ctx, page = new_page(browser)
    try:
        page.set_content('<html lang="en"><title>t</title><body><h1>x</h1>'
                         '<p id="a" style="color:#000">black</p><p style="color:#767676">grey</p></body></html>')
        got = {c["what"].split('"')[1]: c["ratio"] for c in page.evaluate(AUDIT_JS)["contrast"]}
        assert got["black"] == pytest.approx(21.0, abs=0.01)
        assert got["grey"] == pytest.approx(4.54, abs=0.01)
    finally:
        ctx.close()


def test_every_judge_page_passes_the_mechanical_checks(browser, site):
    SHOTS.mkdir(parents=True, exist_ok=True)
    problems, titles = [], {}
    ctx, page = new_page(browser)
    try:
        for label, address in pages(site):
            page.set_viewport_size({"width": 1280, "height": 800})
            page.goto(address)
            js_ready(page)
            for width in (1280, 360, 320):
                page.set_viewport_size({"width": width, "height": 800})
                if width == 1280:
                    titles[label] = page.title()
                    problems += audit(page, label)
                else:
                    scroll = page.evaluate("() => document.documentElement.scrollWidth")
                    if scroll > width:
                        problems.append(f"{label}: scrolls sideways at {width} px ({scroll} px wide)")
                    if width == 360:
                        problems += [p for p in audit(page, f"{label}@360", targets_only=True) if "target" in p]
                if (width == 360 and label in SHOT_PAGES) or (width == 1280 and label == "task-1-open_sort"):
                    page.screenshot(path=str(SHOTS / f"a11y-{label}-{width}.png"), full_page=True)
    finally:
        ctx.close()
    assert not problems, "\n".join(problems)
    task_titles = [titles[f"task-{n}-{k}"] for n, k in enumerate(KIND_NAMES, start=1)]
    assert len(set(task_titles)) == len(task_titles), f"task pages share a title: {task_titles}"
    assert all(f"{n} of {len(KIND_NAMES)}" in t for n, t in enumerate(task_titles, start=1)), task_titles


def test_focus_is_always_visible_and_tab_reaches_the_end(browser, site):
    problems = []
    ctx, page = new_page(browser, width=360, height=800)
    try:
        for label, address in pages(site):
            if label in ("task-3-label_definition", "task-4-label_both"):
                continue    # the same markup as show=name (one macro); the page audit above covers their text
            page.goto(address)
            js_ready(page)
            # task pages: start after the h1 (the shell before it is walked on the review page, same markup)
            start = label.startswith("task-")
            if start:
                page.locator("h1").click()        # moves the sequential focus starting point, focuses nothing
            # every focus change is measured in the page as it happens (fast: no round trip per key)
            n_stops = page.evaluate(f"""(fromH1) => {{ window.__focus = []; const f = {FOCUS_JS};
                document.addEventListener('focusin', (e) => window.__focus.push(f(e.target)));
                const h1 = document.querySelector('h1'), groups = new Set();
                return Array.from(document.querySelectorAll('a[href], button, input:not([type=hidden]), select,'
                    + ' textarea, summary')).filter((el) => {{
                  if (el.disabled || !el.checkVisibility()) return false;
                  if (fromH1 && !(h1.compareDocumentPosition(el) & Node.DOCUMENT_POSITION_FOLLOWING)) return false;
                  if (el.type !== 'radio') return true;   // one tab stop per radio group
                  if (groups.has(el.name)) return false;
                  groups.add(el.name); return true; }}).length; }}""", start)
            for _ in range(n_stops):
                page.keyboard.press("Tab")
            seen = page.evaluate("() => window.__focus")
            order = [f["at"] for f in seen]
            if len(seen) != n_stops or len(set(order)) != n_stops:
                problems.append(f"{label}: {n_stops} tab stops, but Tab reached {len(set(order))} different ones"
                                f" in {len(seen)} moves (trap or unreachable control?)")
            elif order != sorted(order):
                problems.append(f"{label}: Tab order differs from the reading order")
            for f in seen:
                if not f["shown"]:
                    problems.append(f"{label}: no visible focus on {f}")
                if not f["onscreen"]:
                    problems.append(f"{label}: focused element is off screen: {f}")
            tags = {f["tag"] for f in seen}
            if page.locator("button[type=submit]:visible").count() and "BUTTON" not in tags:
                problems.append(f"{label}: Tab never reached a button")
    finally:
        ctx.close()
    assert not problems, "\n".join(problems)


def _tab_to(page, predicate, limit=40):
    for _ in range(limit):
        page.keyboard.press("Tab")
        f = page.evaluate(FOCUS_JS)
        if predicate(f):
            return f
    raise AssertionError("Tab never reached the wanted control")


def test_whole_task_by_keyboard_alone_with_a_comment(browser, site):
    ctx, page = new_page(browser, width=360, height=800)
    b, inv = site["built"], site["invs"]["Judge E"]
    try:
        page.goto(url(site, "Judge E", "/task/2"))
        js_ready(page)
        n_units = page.locator("fieldset.unit").count()
        assert n_units == 9
        for i in range(n_units):
            f = _tab_to(page, lambda f: f["tag"] == "INPUT" and f["name"].startswith("v__"))
            page.keyboard.press("Space")           # the first option of the group
            page.keyboard.press("ArrowDown")       # moves and selects the second
            f2 = _tab_to(page, lambda f: f["tag"] == "SUMMARY", limit=2)
            assert f2["text"] == "Add a comment", f2
            if i == 0:
                page.keyboard.press("Enter")       # opens the disclosure
                _tab_to(page, lambda f: f["tag"] == "TEXTAREA", limit=1)
                page.keyboard.type("Keyboard only.")
        expect(page.locator("fieldset.unit .save-state.is-saved")).to_have_count(n_units)
        _tab_to(page, lambda f: f["tag"] == "BUTTON" and "Save and continue" in f["text"], limit=3)
        page.keyboard.press("Enter")
        page.wait_for_url("**/task/3")
        task_id = b.store.tasks(b.round_id)[1]["id"]
        got = {a["item"]: a for a in b.store.judge_answers(inv["judge_id"], b.round_id) if a["task_id"] == task_id}
        assert len(got) == n_units and all(a["value"] for a in got.values())
        assert [a["comment"] for a in got.values()].count("Keyboard only.") == 1
    finally:
        ctx.close()


def test_open_sort_by_keyboard_and_pile_naming_hints(browser, site):
    ctx, page = new_page(browser, width=360, height=800)
    try:
        page.goto(url(site, "Judge F", "/task/1"))
        js_ready(page)
        first = page.locator("select[name^='v__']").first
        first.focus()
        page.keyboard.press("ArrowDown")          # a closed select changes with the arrow keys
        expect(first).to_have_value("1")
        unit = first.locator("xpath=ancestor::*[@data-key][1]")
        expect(unit.locator(".save-state")).to_have_text("Saved")
        # a used pile without a name says so next to its name box
        hint = page.locator("[data-key='pile:1'] .pile-hint")
        expect(hint).to_contain_text("needs a name")
        box = page.locator("input[name='v__pile:1']")
        box.fill("Friends")
        box.blur()
        expect(hint).to_have_text("")
        # and the pile's name shows in every statement's list of piles
        expect(first.locator("option[value='1']")).to_have_text("Pile 1: Friends")
        expect(page.locator("select[name^='v__']").nth(1).locator("option[value='1']")).to_have_text(
            "Pile 1: Friends")
        page.screenshot(path=str(SHOTS / "a11y-open-sort-named-360.png"), full_page=True)
        # a second pile used but never named: the review page lists it with a link to its name box
        second = page.locator("select[name^='v__']").nth(1)
        second.select_option("2")
        expect(second.locator("xpath=ancestor::*[@data-key][1]").locator(".save-state")).to_have_text("Saved")
        page.reload()                                  # the server draws the names and hints too
        js_ready(page)
        expect(page.locator("select[name^='v__']").nth(2).locator("option[value='1']")).to_have_text(
            "Pile 1: Friends")
        expect(page.locator("[data-key='pile:2'] .pile-hint")).to_have_text("This pile needs a name.")
        page.goto(url(site, "Judge F", "/review"))
        unnamed = page.locator("ul.unnamed-piles a")
        expect(unnamed).to_have_count(1)
        expect(unnamed).to_have_text("Pile 2")
        unnamed.click()
        js_ready(page)
        expect(page.locator("input[name='v__pile:2']")).to_be_in_viewport()
    finally:
        ctx.close()


def test_save_announcements_are_polite_and_settled(browser, site):
    ctx, page = new_page(browser)
    try:
        page.goto(url(site, "Judge G", "/task/5"))
        js_ready(page)
        live = page.locator("#save-live")
        assert live.get_attribute("aria-live") == "polite"
        assert page.locator(".save-state[aria-live], .save-state[role]").count() == 0
        page.evaluate("""() => { window.__said = [];
          new MutationObserver(() => { const t = document.getElementById('save-live').textContent.trim();
            if (t) window.__said.push(t); }).observe(document.getElementById('save-live'),
            {childList: true, characterData: true, subtree: true}); }""")
        page.locator("fieldset.unit").first.locator("input[value='2']").check()
        expect(page.locator("fieldset.unit").first.locator(".save-state")).to_have_text("Saved")
        expect(live).to_contain_text("Saved")
        said = page.evaluate("() => window.__said")
        assert len(said) == 1 and "Saving" not in said[0] and "answered" in said[0], said
    finally:
        ctx.close()


@pytest.mark.parametrize("n", [1, 6])
def test_errors_are_named_in_text_and_tied_to_their_field(browser, site, n):
    ctx, page = new_page(browser)
    try:
        page.goto(url(site, "Judge G", f"/task/{n}"))
        js_ready(page)
        # a tampered option value reaches the server only through the plain form post
        page.evaluate("""() => { const r = document.querySelector('.unit input[type=radio], .unit select');
                                  if (r.tagName === 'SELECT') { r.options[1].value = 'not-a-choice';
                                    r.selectedIndex = 1; } else { r.value = 'not-a-choice'; r.checked = true; } }""")
        page.get_by_role("button", name="Save and continue").click()
        page.wait_for_load_state()
        expect(page.locator(".banner-error")).to_be_visible()
        link = page.locator(".error-summary a").first
        expect(link).to_be_visible()
        err = page.locator(".field-error").first
        expect(err).to_be_visible()
        unit = page.locator(".unit:has([aria-invalid=true])")
        expect(unit).to_have_count(1)
        bad = unit.locator("[aria-invalid=true]").first
        holder = bad if bad.evaluate("(e) => e.tagName") == "SELECT" else unit
        assert err.get_attribute("id") in (holder.get_attribute("aria-describedby") or "").split()
        assert link.get_attribute("href").endswith("#" + unit.get_attribute("id"))
        problems = audit(page, "task-with-error")     # includes: every field error is tied to its control
        assert not problems, "\n".join(problems)
        page.screenshot(path=str(SHOTS / f"a11y-task-{n}-with-error-1280.png"), full_page=True)
    finally:
        ctx.close()


def test_offline_answer_survives_closing_and_is_sent_when_reopened(browser, site):
    b, inv = site["built"], site["invs"]["Judge F"]
    task_id = b.store.tasks(b.round_id)[4]["id"]
    ctx, page = new_page(browser)
    try:
        page.goto(url(site, "Judge F", "/task/5"))
        js_ready(page)
        unit = page.locator("fieldset.unit").nth(2)
        key = unit.get_attribute("data-key")
        ctx.set_offline(True)
        unit.locator("input[value='4']").check()
        expect(unit.locator(".save-state")).to_have_text("Not saved, retrying")
        expect(page.locator("#save-live")).to_contain_text("kept on this device")
        page.close()                                 # the tab is closed while still offline
        assert (task_id, key) not in {(a["task_id"], a["item"]) for a in b.store.judge_answers(
            inv["judge_id"], b.round_id)}
        ctx.set_offline(False)
        page = ctx.new_page()
        page.goto(url(site, "Judge F", "/task/5"))     # same device, back online: the local copy is sent
        js_ready(page)
        unit = page.locator(f"fieldset.unit[data-key='{key}']")
        expect(unit.locator("input[value='4']")).to_be_checked()
        expect(unit.locator(".save-state")).to_have_text("Saved")
        got = {(a["task_id"], a["item"]): a for a in b.store.judge_answers(inv["judge_id"], b.round_id)}
        assert got[(task_id, key)]["value"] == "4"
    finally:
        ctx.close()
