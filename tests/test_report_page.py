"""report.html in a real browser: headless Chromium at 1280 x 900.

The browser is Debian's ``chromium`` with its ``chromium-driver``, driven by
selenium (the ``test`` extra); nothing is downloaded. ``.ci/run`` installs
the two packages when they are missing, so on CI these tests run; they
skip, saying why, only where no browser can be started.

Two pages: the demo report (binary, three models, costs) and a report on
scikit-learn's wine data (three cultivars, 13 measurements with long
column names such as ``od280/od315_of_diluted_wines``), written to CSV and
read back through the command line as a user's file would be.
"""

import os
import shutil

import pytest

from skbayeslogit.cli import main
from skbayeslogit.datasets import make_orchard_lots
from skbayeslogit.report import build_report, write_outputs

WIDTH, HEIGHT = 1280, 900


def _unavailable(reason):
    """Skip where no browser can be had; fail on CI, whose .ci/run installs one."""
    if os.environ.get("CI") == "true":
        pytest.fail(f"{reason}; on CI the browser tests must run")
    pytest.skip(reason)


@pytest.fixture(scope="module")
def browser():
    try:
        from selenium import webdriver
    except ImportError:
        _unavailable("selenium is not installed (the test extra installs it)")
    from selenium.common.exceptions import WebDriverException
    from selenium.webdriver.chrome.options import Options
    from selenium.webdriver.chrome.service import Service

    chromium, driver = shutil.which("chromium"), shutil.which("chromedriver")
    if chromium is None or driver is None:
        _unavailable(
            "no browser: Debian's chromium and chromium-driver packages are not installed "
            "(.ci/run installs them with apt-get)"
        )
    options = Options()
    # Both paths given: selenium looks for nothing and downloads nothing.
    options.binary_location = chromium
    for argument in ("--headless=new", "--no-sandbox", "--disable-gpu",
                     "--disable-dev-shm-usage", f"--window-size={WIDTH},{HEIGHT}"):  # fmt: skip
        options.add_argument(argument)
    try:
        session = webdriver.Chrome(service=Service(executable_path=driver), options=options)
    except WebDriverException as exc:
        _unavailable(f"Chromium could not be started: {exc.msg}")
    session.set_window_size(WIDTH, HEIGHT)
    yield session
    session.quit()


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo report (all three models, costs), written through the Python API."""
    out = tmp_path_factory.mktemp("demo_page") / "report"
    df = make_orchard_lots(400, random_state=0)
    report = build_report(df, "storage_grade", cv=3, cost_fp=1, cost_fn=4, source="demo")
    write_outputs(report, df, out)
    return report, out / "report.html"


@pytest.fixture(scope="module")
def wine(tmp_path_factory):
    """A multiclass report on scikit-learn's wine data, read from a CSV file."""
    from sklearn.datasets import load_wine

    folder = tmp_path_factory.mktemp("wine_page")
    data = load_wine(as_frame=True)
    frame = data.frame.rename(columns={"target": "cultivar"})
    frame["cultivar"] = [f"cultivar_{k}" for k in frame["cultivar"]]
    frame.to_csv(folder / "wine.csv", index=False)
    out = folder / "report"
    args = ["report", str(folder / "wine.csv"), "--target", "cultivar", "--cv", "3"]
    assert main([*args, "--quiet", "--out", str(out)]) == 0
    return out / "report.html"


def _open(browser, page):
    browser.get(page.as_uri())
    return browser


def _layout(browser):
    """What the checks read off the page, in one script."""
    return browser.execute_script(
        """
        const cells = [...document.querySelectorAll('td, th')].map(c => c.textContent.trim());
        return {
          inner: window.innerWidth,
          scroll: document.documentElement.scrollWidth,
          images: [...document.images].map(i => ({src: i.src.slice(0, 22),
                   complete: i.complete, width: i.naturalWidth})),
          external: document.querySelectorAll('link[href], script[src], iframe').length,
          nan: cells.filter(t => t.toLowerCase() === 'nan'),
          scrolling: [...document.querySelectorAll('.wide')]
                     .filter(w => w.scrollWidth > w.clientWidth).length,
          sections: [...document.querySelectorAll('main > section')]
                    .map(s => [s.id, s.querySelector('h2').textContent.trim()]),
        };
        """
    )


def _check_layout(found):
    assert found["inner"] == WIDTH  # the window is what the checks assume
    assert found["scroll"] <= WIDTH, "the page is wider than the window"
    # No table needs its own scroll bar either: the wide ones are folded.
    assert found["scrolling"] == 0
    assert found["images"], "no figure on the page"
    for image in found["images"]:
        assert image["src"] == "data:image/png;base64,", "a figure is not embedded"
        assert image["complete"] and image["width"] > 0, "a figure did not load"
    assert found["external"] == 0  # nothing fetched: the page works offline
    assert found["nan"] == []


def test_demo_page_fits_1280_pixels_with_every_figure(browser, demo):
    _, page = demo
    found = _layout(_open(browser, page))
    _check_layout(found)
    titles = dict(found["sections"])
    # The tempered model has no posterior: its heading promises no intervals.
    assert "intervals" not in titles["coefficients_tempered"]
    assert titles["coefficients_laplace"].endswith("(90% intervals)")


def test_demo_page_opens_with_the_summary(browser, demo):
    report, page = demo
    found = _layout(_open(browser, page))
    assert found["sections"][0] == ["summary", "Summary"]


def test_wine_page_fits_1280_pixels(browser, wine):
    found = _layout(_open(browser, wine))
    _check_layout(found)
    titles = dict(found["sections"])
    assert "calibration" in titles and "doubtful" in titles


def test_rows_are_labelled_by_id_not_by_position(browser, demo):
    """The doubtful rows carry their lot IDs (the demo's ID column), not 0, 1, 2."""
    report, page = demo
    _open(browser, page)
    labels = browser.execute_script(
        "const table = document.querySelector('#doubtful table.data');"
        "return [...table.querySelectorAll('tbody th')].map(t => t.textContent.trim());"
    )
    expected = report.doubtful["lot_id"].head(len(labels)).tolist()
    assert labels and labels == expected


# -- what the page says, read from its text (no browser needed) ----------------


def test_a_figure_that_cannot_be_drawn_is_named_with_the_reason(demo, tmp_path, monkeypatch):
    """Without matplotlib the page still opens, and says which figures are
    missing and why, where each would have been."""
    import sys

    from skbayeslogit._frame.report_files import write_files

    report, _ = demo
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    monkeypatch.setitem(sys.modules, "matplotlib.figure", None)
    written = write_files(report, report.frame, tmp_path, caution="screening aid")
    page = written["html"][0].read_text(encoding="utf-8")
    assert written["png"] == [] and "<img" not in page
    for name in ("coefficients_laplace", "coefficients_probit", "calibration_laplace", "boundary"):
        assert f"Figure <code>{name}</code> could not be drawn: plotting needs matplotlib" in page


def test_level_labels_are_exact(tmp_path):
    """A 97.5% level reads "97.5%" on the page, never a rounded "98%"."""
    df = make_orchard_lots(150, random_state=2)
    report = build_report(df, "storage_grade", models=("laplace",), cv=2, level=0.975)
    written = write_outputs(report, df, tmp_path / "report")
    page = written["html"][0].read_text(encoding="utf-8")
    assert "coefficients, features standardised (97.5% intervals)" in page
    assert "Predictive probabilities with 97.5% credible bounds" in page
    assert "lower 97.5%" in page and "98%" not in page
