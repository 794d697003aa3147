"""Record pages: self-contained HTML, escaping, links, and rendering in a real browser."""

from __future__ import annotations

import shutil
import subprocess
from datetime import UTC, datetime, timedelta
from html.parser import HTMLParser
from pathlib import Path

import jinja2
import pytest

from buildsheet.render.site import environment, page_name, render_site, write_site
from buildsheet.store import ledger as rec

T0 = datetime(2024, 5, 4, 9, 30, tzinfo=UTC)
BUILT = "2024-05-04T10:00:00+00:00"
INCH = 0.0254  # international inch, exact by definition (1959 agreement; from memory)


def leg_m(f_hz: float) -> float:
    """Half of the 143/f (m, f in MHz) starting length (REFERENCES 11, common practice)."""
    return 143.0 / (f_hz / 1e6) / 2.0


def make_store(path: Path) -> list[rec.ElementHistory]:
    # Band edges ITU Region 2 (REFERENCES 11); cut 3 % long (REFERENCES 11, common practice).
    e40 = rec.ElementRow("K03-40m", "K03", "nvis-fan", "40m", 7.1e6, 7.0e6, 7.3e6,
                         leg_m(7.1e6), leg_m(7.1e6) * 1.03, -leg_m(7.1e6) / 7.1e6, ("K03-80m",))
    e80 = rec.ElementRow("K03-80m", "K03", "nvis-fan", "80m", 3.6e6, 3.5e6, 4.0e6,
                         leg_m(3.6e6), leg_m(3.6e6) * 1.03, -leg_m(3.6e6) / 3.6e6, ("K03-40m",))
    with rec.open_store(path) as store:
        rec.sync_elements(store, [e40, e80], 1, T0)
        rec.record_print(store, 1, "K03-40m", "sheet", "f" * 64, "sheets/K03-nvis-fan.pdf", T0)
        rec.add_measurement(store, "K03-40m", 6.95e6, 1.8, "<b>first</b> & windy", T0)
        rec.add_trim(store, "K03-40m", "both", 0.15, "", T0 + timedelta(minutes=4))
        return rec.load_histories(store)


class Audit(HTMLParser):
    """Collects tags, attributes that load or link things, ids and text."""

    def __init__(self) -> None:
        super().__init__()
        self.tags: list[str] = []
        self.refs: list[tuple[str, str, str]] = []
        self.ids: dict[str, str] = {}
        self._id: str | None = None
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        for name, value in attrs:
            if name in ("src", "href", "srcset", "action", "data", "poster"):
                self.refs.append((tag, name, value or ""))
            if name == "id" and value:
                self._id = value

    def handle_data(self, data: str) -> None:
        self.text.append(data)
        if self._id and data.strip():
            self.ids[self._id] = data.strip()
            self._id = None


def audit(html: str) -> Audit:
    a = Audit()
    a.feed(html)
    a.close()
    return a


def test_pages_are_self_contained_and_linked(tmp_path: Path) -> None:
    histories = make_store(tmp_path / "club.records.sqlite")
    pages = render_site(histories, BUILT)
    assert set(pages) == {"index.html", "K03-40m.html", "K03-80m.html"}
    for name, html in pages.items():
        a = audit(html)
        assert "script" not in a.tags and "link" not in a.tags and "img" not in a.tags
        assert "@import" not in html and "url(" not in html  # CSS loads nothing either
        for _tag, _attr, ref in a.refs:  # every link is a page of this site (or a sheet)
            assert "://" not in ref and not ref.startswith("//"), (name, ref)
            assert ref in pages or ref.endswith(".pdf"), (name, ref)
        assert 'name="viewport"' in html  # phone-readable


def test_element_page_content_and_escaping(tmp_path: Path) -> None:
    h40 = make_store(tmp_path / "club.records.sqlite")[0]
    html = render_site([h40], BUILT)["K03-40m.html"]
    a = audit(html)
    cut = h40.element.cut_leg_m
    assert a.ids["K03-40m-A-cut"] == f"{cut:.3f} m"  # the first reading confirmed the cut
    assert a.ids["K03-40m-A-now"] == f"{cut - 0.15:.3f} m"
    # Feet-inches independently: 1 in = 25.4 mm exactly; nearest 1/8 inch.
    feet = int(cut / INCH) // 12
    cut_row = html.split('id="K03-40m-A-cut"')[1].split("</td>")[0]
    assert f"{feet} ft" in cut_row
    assert "6.950 MHz" in html and "-150.0 kHz" in html
    assert "removed" in html and "sheets/K03-nvis-fan.pdf" in html
    assert "&lt;b&gt;first&lt;/b&gt; &amp; windy" in html and "<b>first" not in html
    assert "K03-80m.html" in html  # partner on the same feed
    assert "power lines" in html and "Local rules" in html


def test_templates_refuse_missing_values() -> None:
    env = environment()
    assert env.autoescape is True or callable(env.autoescape)
    with pytest.raises(jinja2.UndefinedError):
        env.get_template("element.html").render(page=object())


def test_page_names_are_safe() -> None:
    assert page_name("K03-40m") == "K03-40m.html"
    assert page_name("K03-7150k") == "K03-7150k.html"
    assert page_name("../x y") == "_x_y.html"


def test_write_site_writes_every_page(tmp_path: Path) -> None:
    histories = make_store(tmp_path / "club.records.sqlite")
    written = write_site(tmp_path / "site", histories, BUILT)
    assert [p.name for p in written] == ["index.html", "K03-40m.html", "K03-80m.html"]
    assert sorted(p.name for p in (tmp_path / "site").iterdir()) == sorted(
        p.name for p in written)  # no temporary files left behind


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable"):
        found = shutil.which(name)
        if found:
            return found
    return None


def test_record_page_renders_in_a_real_browser(tmp_path: Path) -> None:
    browser = _chromium()
    if browser is None:
        pytest.skip("chromium is not installed (the CI script .ci/run installs Debian's "
                    "chromium package); cannot check the page in a real browser")
    histories = make_store(tmp_path / "club.records.sqlite")
    page = write_site(tmp_path / "site", histories, BUILT)[1]
    assert page.name == "K03-40m.html"
    profile = tmp_path / "profile"
    cmd = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
           "--no-first-run", "--disable-background-networking", "--disable-component-update",
           "--disable-sync", f"--user-data-dir={profile}", "--dump-dom", page.as_uri()]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    dom = done.stdout
    cut = f"{histories[0].element.cut_leg_m:.3f} m"
    assert f'id="K03-40m-A-cut">{cut}<' in dom  # the DOM the browser built, not our source
    assert "<tbody>" in dom  # the parser built table sections from our markup
