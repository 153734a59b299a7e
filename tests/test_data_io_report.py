"""The HTML report (data_io.report): one self-contained, escaped page from a real small fit."""

import base64
import math
import re
from html.parser import HTMLParser
from types import SimpleNamespace

import numpy as np
import pytest
from matplotlib.figure import Figure

from heatsight import inverse
from heatsight.data_io import plots, report
from heatsight.data_io.case import Zone
from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature, UnknownFlux,
                     UnknownTemperature)

N = 14
BAD = "<script>alert(1)</script>"
ZONE = "Ring A & B"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def plate():
    """Bottom-face heat flux; the sensor named BAD reads 8 K high and is set aside; one zone
    whose name holds '&'."""
    a, L, k = 0.15, 0.04, 16.0
    cyl = Cylinder(a, L, k)
    truth = CylinderModel(cyl, {"bottom": Flux(lambda r, th: 20000 * (1 + 0.2 * (r / a) * np.cos(th))),
                                "top": Convection(40.0, 298.15), "side": Insulated()})
    rng = np.random.default_rng(3)
    r = rng.uniform(0, 0.9 * a, N)
    th = rng.uniform(0, 2 * np.pi, N)
    z = rng.choice([0.005, 0.01, 0.02], N)
    T = truth.temperature(r, th, z) + rng.normal(0, 0.2, N)
    T[2] += 8.0
    names = [f"TC{i}" for i in range(N)]
    names[2] = BAD
    rd = inverse.SensorReadings(names, r, th, z, T, np.full(N, 0.2), np.zeros(N), np.zeros(N))
    zones = [Zone(ZONE, "bottom", (0.0, 2 * math.pi), r=(0.05, 0.10))]
    case = SimpleNamespace(cylinder=cyl, faces={"bottom": UnknownFlux(), "top": Convection(40.0, 298.15),
                                                "side": Insulated()}, zones=zones)
    res = inverse.fit(case, rd, harmonics=4, terms=6, grid=(25, 48))
    assert res.summary["set_aside"] == [BAD]  # the premise of the escaping tests
    return res


@pytest.fixture(scope="module")
def wall():
    """Side-wall temperature of a tall part whose ends are held at 400 K."""
    a, L, k = 0.05, 0.2, 16.0
    cyl = Cylinder(a, L, k)
    prof = Temperature(lambda th, z: 400.0 + 30.0 * np.sin(np.pi * z / L) * (1 + 0.3 * np.cos(th)))
    truth = CylinderModel(cyl, {"bottom": Temperature(400.0), "top": Temperature(400.0), "side": prof})
    rng = np.random.default_rng(4)
    r = rng.uniform(0.3 * a, 0.85 * a, N)
    th = rng.uniform(0, 2 * np.pi, N)
    z = rng.uniform(0.02, 0.18, N)
    T = truth.temperature(r, th, z) + rng.normal(0, 0.2, N)
    rd = inverse.SensorReadings([f"W{i}" for i in range(N)], r, th, z, T, np.full(N, 0.2), np.zeros(N),
                                np.zeros(N))
    case = SimpleNamespace(cylinder=cyl, faces={"bottom": Temperature(400.0), "top": Temperature(400.0),
                                                "side": UnknownTemperature()}, zones=[])
    return inverse.fit(case, rd, harmonics=4, terms=6, grid=(25, 48))


@pytest.fixture(scope="module")
def full_page(plate, tmp_path_factory):
    """write_report with its default (all) figures; returns (folder, path, text)."""
    folder = tmp_path_factory.mktemp("report")
    path = report.write_report(plate, folder / "report.html",
                               case_text=[("part", "plate <150 mm> & 'steel'"), ("top face", "convection")])
    return folder, path, path.read_text(encoding="utf-8")


def _without_data_uris(text):
    return re.sub(r"data:image/png;base64,[A-Za-z0-9+/=]+", "data:", text)


class _Balance(HTMLParser):
    """Checks that every opened element is closed in order (void elements excepted)."""

    VOID = {"meta", "img", "br", "hr", "link", "input"}

    def __init__(self):
        super().__init__()
        self.stack, self.errors = [], []

    def handle_starttag(self, tag, attrs):
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack.pop() != tag:
            self.errors.append(tag)


def test_page_is_well_formed(full_page):
    parser = _Balance()
    parser.feed(full_page[2])
    assert parser.errors == [] and parser.stack == []


def test_one_self_contained_file(full_page):
    folder, path, text = full_page
    assert [p.name for p in folder.iterdir()] == ["report.html"]
    assert text.startswith("<!DOCTYPE html>") and text.rstrip().endswith("</html>")
    srcs = re.findall(r'\ssrc\s*=\s*"([^"]*)"', text, flags=re.I)
    assert len(srcs) == len(plots.FIGURE_NAMES)
    for src in srcs:
        assert src.startswith("data:image/png;base64,")
        assert base64.b64decode(src.split(",", 1)[1]).startswith(PNG_SIGNATURE)
    hrefs = re.findall(r'\shref\s*=\s*"([^"]*)"', text, flags=re.I)
    assert hrefs and all(h.startswith("#") for h in hrefs)
    plain = _without_data_uris(text).lower()
    for banned in ("http:", "https:", "file:", "<script", "<link", "<iframe", "@import", "url("):
        assert banned not in plain


def test_cautions(full_page):
    text = full_page[2]
    assert 'id="cautions"' in text
    for phrase in ("Heated hardware can burn", "Heaters are electrical equipment",
                   "support engineering judgement",
                   "do not replace direct measurement, interlocks or inspection",
                   "Local codes and licensed practice govern"):
        assert phrase in text


def test_user_text_is_escaped(full_page):
    text = full_page[2]
    assert BAD not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert ZONE not in text and "Ring A &amp; B" in text
    assert "plate &lt;150 mm&gt; &amp; &#x27;steel&#x27;" in text
    # the warning that names the set-aside sensor is escaped as well
    warnings = text.split('id="warnings"')[1].split("</section>")[0]
    assert "&lt;script&gt;" in warnings


def test_set_aside_sensors_listed(full_page, plate):
    text = full_page[2]
    rows = re.findall(r'<tr class="set-aside">(.*?)</tr>', text)
    assert len(rows) == len(plate.summary["set_aside"]) == 1
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in rows[0]
    assert "Set aside" in text and "<strong>&lt;script&gt;" in text
    # the default limit depends on how many sensors are checked: the note says for how many
    assert f"the limit for the {plate.summary['n_sensors_used']} sensors in the fit" in text
    # every sensor has a row
    sensors = text.split('id="sensors"')[1].split("</section>")[0]
    assert sensors.count("<tr class=") == N


def test_answers_in_user_units(full_page, plate):
    text = full_page[2]
    s = plate.summary
    assert f"{s['mean'] / 1e3:.2f} kW/m²" in text          # 4 significant digits at ~20 kW/m^2
    # the power as every value beside its band (report_format.pm95_of): 1414 ± 16 W (95 %)
    assert re.search(rf"{s['total_power_W']:.4g} ± [0-9.]+ W \(95 %\)", text)
    assert f"α = {s['strength']:.3g}" in text and "evidence" in text
    assert f"{s['chi2']:.3g} for {s['n_sensors_used']} readings" in text
    assert f"{s['effective_parameters']:.2f}" in text
    zone = s["zones"][0]
    zones = text.split("<h3>Zones</h3>")[1].split("</table>")[0]
    assert f"{zone['mean'] / 1e3:.2f}" in zones
    assert f"{zone['lower'] / 1e3:.2f} to {zone['upper'] / 1e3:.2f}" in zones
    assert f"{zone['power_W']:.3g} ± " in zones          # three digits hold a band of +-16 W


def test_temperature_shown_in_celsius(wall):
    text = report.render_report(wall, figures={})
    # Celsius scale definition (BIPM SI Brochure): t/degC = T/K - 273.15, so 400 K -> 126.85 degC;
    # the ends are held at 400 K and the wall estimate is pinned to them at the rim (its minimum)
    assert "126.85 °C" in text
    assert "minimum</th><td>126.85 °C" in text
    assert "400.00 °C" not in text and "400 K" not in text
    assert "temperature 126.85 °C" in text  # default case description of the 400 K end faces
    assert "<img" not in text  # figures={} leaves them out


def test_default_case_text(plate):
    rows = dict(report.default_case_text(plate))
    assert rows["radius"] == "150 mm" and rows["height"] == "40 mm"
    assert rows["top face (z = height)"] == "convection, h = 40 W/(m²·K), ambient 25.00 °C"
    assert rows["thermocouples"] == f"{N} listed, {N - 1} used in the fit"


def test_extra_sections_and_title(plate):
    text = report.render_report(plate, figures={}, title="Run <7> & co",
                                extra_sections=[("Trend <log>", "<p><em>steady</em></p>")])
    assert "<h1>Run &lt;7&gt; &amp; co</h1>" in text
    assert "<h2>Trend &lt;log&gt;</h2>" in text and "<p><em>steady</em></p>" in text
    assert text.index("Trend &lt;log&gt;") < text.index('id="cautions"')


def test_figures_from_paths_and_bytes(plate, tmp_path):
    small = Figure(figsize=(1, 1))
    small.add_subplot().plot([0, 1])
    png = plots.figure_png(small, dpi=20)
    p = tmp_path / "tiny.png"
    p.write_bytes(png)
    text = report.render_report(plate, figures={"face_map": p, "custom <x>": png})
    srcs = re.findall(r'src="data:image/png;base64,([^"]+)"', text)
    assert [base64.b64decode(s) for s in srcs] == [png, png]
    assert "custom &lt;x&gt;" in text
    with pytest.raises(ValueError, match="not a PNG"):
        report.render_report(plate, figures={"face_map": b"GIF89a..."})


def test_write_report_replaces_atomically(plate, tmp_path):
    path = tmp_path / "r.html"
    path.write_text("old")
    report.write_report(plate, path, figures={})
    assert path.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert [q.name for q in tmp_path.iterdir()] == ["r.html"]


@pytest.mark.parametrize("x, n, text", [(0.01576, 2, "0.016"), (1018.4, 2, "1000"), (2.5, 2, "2.5"),
                                        (0.0, 2, "0"), (float("nan"), 2, "–"), (123.456, 3, "123")])
def test_sig(x, n, text):
    assert report.sig(x, n) == text
