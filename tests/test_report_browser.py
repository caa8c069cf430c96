"""The HTML report in a real headless browser (Debian's chromium driven by Playwright for
Python; no browser download): at a desktop width (1280 px) and a phone width (390 px)
nothing overflows the window sideways (wide tables scroll inside their own box), every
navigation link brings its section into view, the key figures are on the page and the
verdict is shown once; at the phone width no figure in a table cell, key-figure card,
list item or the verdict has its number on one line and its unit on the next."""
from __future__ import annotations

import shutil
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
playwright = pytest.importorskip("playwright.sync_api")

pytestmark = [pytest.mark.slow,
              pytest.mark.skipif(CHROMIUM is None, reason="needs chromium (apt: chromium)")]

# Flags for a quiet, sandbox-free headless run on a CI machine: no GPU, no network
# side traffic. Playwright itself runs headless and gives each launch a fresh profile
# folder (it refuses --user-data-dir in the arguments).
FLAGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]

# Elements wider than the window, not inside a box that scrolls sideways.
OVERFLOW_JS = """() => {
  const w = document.documentElement.clientWidth;
  const bad = [];
  for (const el of document.body.querySelectorAll('*')) {
    const r = el.getBoundingClientRect();
    if (r.width === 0 || (r.right <= w + 0.5 && r.left >= -0.5)) continue;
    let p = el.parentElement, scrolls = false;
    while (p && p !== document.body) {
      const o = getComputedStyle(p).overflowX;
      if (o === 'auto' || o === 'scroll' || o === 'hidden') { scrolls = true; break; }
      p = p.parentElement;
    }
    if (!scrolls) bad.push(el.tagName + '.' + el.className + ' ' + Math.round(r.right));
  }
  return bad;
}"""


# Figures whose number and unit sit on different lines. A figure, as a reader sees one
# (written here, not taken from the code): a number with optional sign, thousands commas
# and decimals, not inside a word (CO2e), then a space and its unit: a percent sign,
# "× word", or a word starting with a letter or degree sign ("EUR", "EUR/kW·month",
# "t", "years", "°C"). The range from the number's first character to the unit's last is
# measured with Range.getClientRects(): one line box, or all its boxes at the same top.
SPLIT_FIGURES_JS = r"""() => {
  const figure = /(?<![\w.,·\/])[-+\u2212]?\d[\d,]*(?:\.\d+)?\s(?:%|×\s[^\s,;:()]+|[A-Za-zµ°][^\s,;:()]*)/gu;
  const split = [];
  let checked = 0;
  const cells = document.querySelectorAll(
    'main td, main .figure-card p, main li, .verdict-text');
  for (const cell of cells) {
    const walker = document.createTreeWalker(cell, NodeFilter.SHOW_TEXT);
    const nodes = [];
    let text = '';
    while (walker.nextNode()) {
      nodes.push([walker.currentNode, text.length]);
      text += walker.currentNode.data;
    }
    const at = (pos) => {
      for (let i = nodes.length - 1; i >= 0; i--)
        if (nodes[i][1] <= pos) return [nodes[i][0], pos - nodes[i][1]];
    };
    for (const m of text.matchAll(figure)) {
      const [sn, so] = at(m.index);
      const [en, eo] = at(m.index + m[0].length - 1);
      const range = document.createRange();
      range.setStart(sn, so);
      range.setEnd(en, eo + 1);
      const tops = [...range.getClientRects()].filter(r => r.width > 0).map(r => r.top);
      checked += 1;
      if (tops.length && Math.max(...tops) - Math.min(...tops) > 2) split.push(m[0]);
    }
  }
  return {checked, split};
}"""


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    from tco.pipeline import evaluate
    from tco.report.context import build_context
    from tco.report.html import render_html
    from tco.report.summary import build_summary
    from tco.resources import demo_path
    from tco.scenario import load_scenario

    loaded = load_scenario(demo_path())
    loaded.scenario.uncertainty.draws = 500
    result = evaluate(loaded)
    ctx = build_context(result, build_summary(result))
    path = tmp_path_factory.mktemp("html") / "report.html"
    path.write_text(render_html(ctx, for_print=False), encoding="utf-8")
    return ctx, path


@pytest.fixture(scope="module")
def browser():
    with playwright.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, headless=True, args=FLAGS)
        yield b
        b.close()


def _open(browser, path, width: int, height: int):
    """A new page of ``width`` × ``height`` CSS px showing the report at ``path``."""
    page = browser.new_page(viewport={"width": width, "height": height})
    page.goto(Path(path).as_uri())
    return page


@pytest.mark.parametrize("width", [1280, 390])
def test_nothing_overflows_the_window(report, browser, width):
    ctx, path = report
    page = _open(browser, path, width, 900)
    assert page.evaluate("document.documentElement.scrollWidth") <= width
    assert page.evaluate(OVERFLOW_JS) == []
    # the text column uses the window up to a reading measure, not a fixed narrow column
    main_width = page.evaluate("document.querySelector('main').getBoundingClientRect().width")
    assert main_width >= min(width, 1000) - 40
    if width >= 1000:  # on a desktop every section link is in view, none scrolled away
        assert page.evaluate("(() => { const ol = document.querySelector('nav.contents ol');"
                             " return ol.scrollWidth <= ol.clientWidth; })()")
    page.close()


@pytest.mark.parametrize("width", [390, 1280])
def test_no_figure_split_from_its_unit(report, browser, width):
    ctx, path = report
    page = _open(browser, path, width, 900)
    found = page.evaluate(SPLIT_FIGURES_JS)
    assert found["checked"] >= 250  # the demo's tables, cards and lists are measured
    assert found["split"] == []
    # and the page still fits the window (the tables scroll inside their own box)
    assert page.evaluate("document.documentElement.scrollWidth") <= width
    assert page.evaluate(OVERFLOW_JS) == []
    page.close()


@pytest.mark.parametrize("width", [1280, 390])
def test_navigation_links_reach_their_sections(report, browser, width):
    ctx, path = report
    page = _open(browser, path, width, 800)
    links = page.locator("nav.contents a")
    n = links.count()
    assert n >= 8
    for k in range(n):
        link = links.nth(k)
        target = link.get_attribute("href")[1:]
        link.click()
        page.wait_for_timeout(50)
        top = page.evaluate(f"document.getElementById('{target}').getBoundingClientRect().top")
        assert -2 <= top <= 800 / 2, (target, top)
        # the navigation is still in reach after the jump (at the top of the window)
        nav = page.evaluate("(() => { const r = document.querySelector('nav.contents')"
                            ".getBoundingClientRect(); return [r.top, r.bottom]; })()")
        assert -1 <= nav[0] and nav[1] <= 120, (target, nav)
    page.close()


def test_key_figures_present_and_verdict_once(report, browser):
    ctx, path = report
    page = _open(browser, path, 1280, 900)
    text = page.inner_text("body")
    for fig in ctx["key_figures"]:
        assert fig["value"] in text, fig
    assert text.count(ctx["verdict"]) == 1
    assert "Page size" not in text
    page.close()
