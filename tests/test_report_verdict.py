"""The report leads with the answer (data_io.verdict, data_io.report), its colour scale does
not stretch noise into a pattern (data_io.face_scale), and people read numbers with 3
significant digits and "± ... (95 %)" (data_io.report_format, fit_outputs, trend_text)."""

import json
import math
import re
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.stats import norm

import heatsight
from heatsight import inverse
from heatsight.data_io import plots, report, trend_text, verdict
from heatsight.data_io.case import load_case
from heatsight.data_io.face_scale import colour_scale
from heatsight.data_io.fit_outputs import summary_lines
from heatsight.data_io.report_format import eng, pm95
from heatsight.forward import Convection, Cylinder, Insulated, UnknownFlux

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data" / "platen.toml"


@pytest.fixture(scope="module")
def demo():
    return heatsight.fit(DEMO)


@pytest.fixture(scope="module")
def truth():
    # the demo's truth: an independent scikit-fem solution of the same platen (demo_data/truth.json)
    return json.loads((ROOT / "demo_data" / "truth.json").read_text())


class _Texts(HTMLParser):
    """Visible text pieces in document order with the ids of their enclosing sections."""

    def __init__(self):
        super().__init__()
        self.stack, self.texts, self.skip = [], [], 0

    def handle_starttag(self, tag, attrs):
        if tag in ("style", "title", "head"):
            self.skip += 1
        if tag not in ("meta", "img", "br"):
            self.stack.append((tag, dict(attrs).get("id")))

    def handle_endtag(self, tag):
        if tag in ("style", "title", "head"):
            self.skip -= 1
        while self.stack and self.stack.pop()[0] != tag:
            pass

    def handle_data(self, data):
        if data.strip() and not self.skip:
            self.texts.append((data.strip(), [t for t, _ in self.stack], [i for _, i in self.stack if i]))


def test_verdict_names_the_weak_zone_and_the_faulty_sensor(demo, truth):
    sentences = verdict.verdict(demo.raw)
    text = " ".join(sentences)
    true_weakest = min(truth["zone_mean_W_m2"], key=truth["zone_mean_W_m2"].get)   # scikit-fem truth
    assert true_weakest == "outer 60-180"
    assert sentences[0].startswith(f"The weakest zone is {true_weakest}, at ")
    assert "below the face mean" in sentences[0]
    assert "The strongest zone is inner" in text
    bad = truth["bad_sensor"]                                                        # TC19, reads 6 K high
    said = next(s for s in sentences if s.startswith(bad))
    assert "set aside" in said and "higher than the other sensors predict" in said
    gap = float(re.search(r"reads ([0-9.]+) K higher", said).group(1))
    assert abs(gap - 6.0) < 1.0                                   # truth.json: TC19 reads 6 K high
    power, half = (float(x) for x in re.search(r"\b([0-9.]+) ± ([0-9.]+) W \(95 %\)", text).groups())
    assert abs(power - truth["total_power_W"]) <= half                # scikit-fem truth inside the 95 % interval


def test_verdict_is_the_first_text_after_the_title(demo):
    html = report.render_report(demo.raw, figures={}, title="Platen <check>")
    p = _Texts()
    p.feed(html)
    title = next(i for i, (_, tags, _) in enumerate(p.texts) if "h1" in tags)
    after = p.texts[title + 1]
    assert "verdict" in after[2] and after[0].startswith("The weakest zone is outer 60-180")
    lead = html[html.index("</h1>"):html.index('id="numbers"')]
    assert "verdict" in lead and str(ROOT) not in lead and "platen.toml" not in lead   # no paths in the lead
    assert html.index('id="case"') > html.index('id="sensors"') and 'id="glossary"' in html
    assert "Local codes and licensed practice" in html


def test_every_plus_minus_in_the_report_is_a_95_interval(demo):
    html = report.render_report(demo.raw, figures={})
    warnings = html[html.index('id="warnings"'):].split("</section>")[0]    # the fit's own words, sd named
    tables = re.findall(r"<table.*?</table>", html, flags=re.S)
    for t in tables:                               # a table says the level once, in the column head
        for head in re.findall(r"<th>([^<]*±[^<]*)</th>", t):
            assert "(95 %)" in head, head
    text = html.replace(warnings, "")
    for t in tables:
        text = text.replace(t, "")
    text = re.sub(r"<[^>]+>", " ", text)
    assert "+-" not in text and " sd " not in text
    for m in re.finditer(r"± [0-9.]+ [^ ]+", text):
        tail = text[m.end():m.end() + 12]
        assert "(95 %)" in tail or "at 95 %" in tail, text[m.start() - 40:m.end() + 12]
    assert not re.search(r"\d\.\d+e[+-]\d", re.sub(r"α = [^ ]+", "", text))   # no exponents for people


def test_console_says_95_and_uses_z95(demo):
    lines = summary_lines(demo.raw)
    s = demo.raw.summary
    assert not any("+-" in ln for ln in lines)
    half = norm.ppf(0.975) * s["mean_sd"]                          # scipy: 97.5 % normal quantile
    assert f"{eng(s['mean'])} ± {report.sig(half, 2)} W/m^2 (95 %)" in lines[1]
    assert f"± {report.sig(norm.ppf(0.975) * s['total_power_sd_W'], 2)} W (95 %)" in lines[5]
    assert not any(re.search(r"\d\.\d+e[+-]\d", ln) for ln in lines if "smoothing strength" not in ln
                   and "warning" not in ln)


@given(st.floats(min_value=1e-3, max_value=999.0, allow_nan=False))
@settings(max_examples=200, deadline=None)
def test_three_significant_digits_as_python_g_format(x):
    # reference: Python's format-spec 'g' presentation rounds to 3 significant digits
    for v in (x, -x):
        assert float(eng(v)) == pytest.approx(float(f"{v:.3g}"), rel=1e-12)
        digits = eng(v).lstrip("-").replace(".", "").lstrip("0")
        assert len(digits) == 3


@pytest.mark.parametrize("x, text", [(11568.2, "11568"), (817.68, "818"), (0.022137, "0.0221"), (99.96, "100"),
                                     (-1892.9, "-1893"), (0.0, "0"), (float("nan"), "–")])
def test_integer_digits_are_kept(x, text):
    assert eng(x) == text          # 3 significant digits, integer digits never rounded to zeros


def test_trend_values_in_kilowatts_with_95_interval():
    # the example: a change of -4.98e+03 W/m^2 with sd 150 W/m^2 on a ~12 kW/m^2 face
    summary = {"quantity": "heat_flux", "face": "bottom", "unit": "W/m^2", "zones": ["outer", "inner"],
               "reference_fit": {"min": 9000.0, "max": 13000.0}, "trend_rows": 12,
               "flags": [{"zone": "outer", "flagged_rows": 3, "first_flagged_start_s": 7200.0}],
               "last_row": {"changes": {"outer": [-4980.0, 150.0], "inner": [-40.0, 120.0]}}}
    said = trend_text.flag_sentences(summary)
    half = norm.ppf(0.975) * 150.0 / 1e3                            # scipy: 97.5 % normal quantile
    assert said[0].startswith("Zone outer changed beyond its flag limit from t = 2.00 h (3 rows flagged)")
    assert f"-4.98 ± {report.sig(half, 2)} kW/m² (95 %)" in said[0]
    assert "e+03" not in said[0] and "+-" not in said[0]
    console = trend_text.flag_sentences(summary, report=False)[0]
    assert "-4980 ± 290 W/m^2 (95 %)" in console


def _uniform_fit(seed=5):
    """A platen heated with a uniform flux: exact 1-D field (plane wall with convection,
    textbook closed form: T(z) = T_amb + q/h + q (L - z)/k, insulated side)."""
    a, L, k, h, q, t_amb = 0.15, 0.04, 16.0, 250.0, 12000.0, 313.15
    rng = np.random.default_rng(seed)
    n = 16
    r = rng.uniform(0, 0.9 * a, n)
    th = rng.uniform(0, 2 * np.pi, n)
    z = rng.choice([0.006, 0.015, 0.032], n)
    T = t_amb + q / h + q * (L - z) / k + rng.normal(0, 0.15, n)
    rd = inverse.SensorReadings([f"T{i}" for i in range(n)], r, th, z, T, np.full(n, 0.15), np.zeros(n), np.zeros(n))
    case = SimpleNamespace(cylinder=Cylinder(a, L, k), faces={"bottom": UnknownFlux(), "top": Convection(h, t_amb),
                                                              "side": Insulated()}, zones=[])
    return inverse.fit(case, rd, harmonics=4, terms=6, grid=(21, 48))


def test_uniform_face_is_not_stretched():
    res = _uniform_fit()
    scale = plots.map_scale(res)
    est = np.asarray(res.grid["estimate"]) / 1e3                     # kW/m^2 (display unit)
    assert scale.uniform
    assert scale.hi - scale.lo >= 2 * scale.half_width - 1e-12
    assert np.ptp(est) < 0.5 * (scale.hi - scale.lo)                 # the noise fills under half the scale
    fig = plots.face_map(res)
    lo, hi = fig.axes[0].collections[0].get_clim()
    assert (lo, hi) == pytest.approx((scale.lo, scale.hi))
    assert "uniform within its 95 % bands" in fig.axes[0].get_title()
    assert any("uniform within its 95 % bands" in s for s in verdict.verdict(res, scale=scale))


@pytest.mark.parametrize("ripple, uniform", [(0.003, True), (0.20, False)])
def test_colour_scale_rule(ripple, uniform):
    theta = np.linspace(0, 2 * np.pi, 97)
    est = 12.0 * (1 + ripple * np.cos(theta))
    half = 0.24                                                       # a 2 % band half-width
    scale = colour_scale(est, est - half, est + half, 12.0)
    assert scale.uniform is uniform
    if uniform:
        assert (scale.lo, scale.hi) == pytest.approx((12.0 - half, 12.0 + half))
    else:                                                             # a real pattern keeps its own range
        assert (scale.lo, scale.hi) == pytest.approx((est.min(), est.max()))


def test_zones_drawn_on_the_face_map(demo):
    case = load_case(DEMO)
    ax = plots.face_map(demo.raw, zones=case.zones).axes[0]
    drawn = {ln.get_gid()[5:]: ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("zone:")}
    assert set(drawn) == {z.name for z in case.zones}
    outer = next(z for z in case.zones if z.name == "outer 60-180")
    th, r = (np.asarray(x, float) for x in drawn["outer 60-180"].get_data())
    ok = np.isfinite(r)
    assert set(np.round(r[ok], 6)) == {100.0, 150.0}                  # its edges: r = 100 mm and 150 mm
    inside = np.mod(th[ok] - outer.theta[0] + 1e-9, 2 * math.pi) <= outer.theta[1] - outer.theta[0] + 2e-9
    assert inside.all()
    labels = {t.get_text() for t in ax.texts}
    assert {z.name for z in case.zones} <= labels


def test_profiles_include_the_weakest_and_strongest_lines(demo, truth):
    angles = plots.profile_angles(demo.raw)
    ang, means = plots.line_means(demo.raw)
    assert angles[0] == pytest.approx(ang[np.argmax(means)]) and angles[1] == pytest.approx(ang[np.argmin(means)])
    assert abs(angles[1] - truth["weak_centre_deg"]) <= 30.0          # scikit-fem truth: weak around 150 deg
    ax = plots.profiles(demo.raw).axes[0]
    labels = [ln.get_label() for ln in ax.get_lines() if str(ln.get_gid()).startswith("profile:")]
    assert "weakest line" in labels[1] and "strongest line" in labels[0]
    colours = {ln.get_color() for ln in ax.get_lines() if str(ln.get_gid()).startswith("profile:")}
    assert len(colours) == len(labels)                                # distinguishable, not greys
    assert not any(c.lower() in ("#808080", "grey", "gray") for c in colours)


def test_pm95_writes_the_level():
    assert pm95("818", 0.7962, "W") == f"818 ± {report.sig(norm.ppf(0.975) * 0.7962, 2)} W (95 %)"  # scipy quantile


@pytest.mark.parametrize("x, sd, text", [
    (11.5689, 0.0125, "11.57 ± 0.024 kW/m² (95 %)"),     # 11.6 would round by more than its band
    (817.7, 0.9, "818 ± 1.8 kW/m² (95 %)"),              # three digits hold the band
    (-4980.0, 148.0, "-4980 ± 290 kW/m² (95 %)"),
    (2.4e31, 1e30, "2.40e+31 ± 2.0e+30 kW/m² (95 %)"),   # no 31-digit integer
    (-4189.301531715689, 3.6e-12, "-4189.302 ± 0 kW/m² (95 %)"),   # known exactly: 7 digits at most, no band
    (0.0, 1e-13, "0 ± 2.0e-13 kW/m² (95 %)"),
    (1.49e-07, 0.28, "0.0 ± 0.55 kW/m² (95 %)"),        # a value lost inside its band
])
def test_a_value_is_never_rounded_by_more_than_its_band(x, sd, text):
    # the last digit shown is at most the 95 % half-width (common practice, no source)
    from heatsight.data_io.report_format import pm95_of
    assert pm95_of(x, sd, "kW/m²") == text


@pytest.mark.parametrize("half, decimals", [(1.8, 1), (18.0, 0), (0.7, 2), (0.05, 2), (180.0, 0)])
def test_temperature_rounded_to_its_interval(half, decimals):
    # a value is written to the last digit of its 2-significant-digit ± (common practice, no source)
    from heatsight.data_io.report_format import _decimals_for
    assert _decimals_for(half) == decimals


def test_side_zone_across_the_seam_is_drawn_in_two_pieces():
    from heatsight.data_io.case import Zone
    from heatsight.data_io.zone_outline import label_point, side_outline
    front = Zone("front", "side", (-math.pi / 3, math.pi / 3), z=(0.07, 0.14))
    x, z = side_outline(front, 0.2)
    ok = np.isfinite(x)
    assert (~ok).sum() >= 1 and x[ok].min() >= 0.0 and x[ok].max() <= 360.0
    assert set(np.round(z[ok], 6)) == {70.0, 140.0}                                # its edges in mm
    assert not ((x[ok] > 60.0 + 1e-9) & (x[ok] < 300.0 - 1e-9)).any()              # nothing drawn outside it
    lx, lz = label_point(front, "side", 0.05, 0.2)
    assert 15.0 <= lx <= 60.0 or 300.0 <= lx <= 345.0                              # its name off the seam
    assert 70.0 <= lz <= 140.0


def test_keys_of_newer_fits_are_shown_when_present(demo):
    import copy
    import dataclasses
    s = copy.deepcopy(demo.raw.summary)
    weak = next(z for z in s["zones"] if z["name"] == "outer 60-180")
    weak.update(nominal_W=150.0, delivered_fraction=weak["power_W"] / 150.0, delivered_fraction_sd=0.01)
    s.update(model="zones", model_weights={"smooth": 0.1, "zones": 0.9},
             unresolved="these readings cannot resolve zone inner",
             prior={"length_scale_m": 0.04, "length_scale_90_m": [0.02, 0.08], "hyperprior_dominated": True,
                    "smooth_limit_weight": 0.75, "length_scale_range_widened_from_m": [0.0075, 0.6],
                    "length_scale_hyperprior_m": [0.0075, 5.37],
                    "axisymmetric_ratio_weights": {"1": 0.1, "4": 0.7, "8": 0.2},
                    "axisymmetric_dimension_weights": {"1": 0.8, "2": 0.2}})
    res = dataclasses.replace(demo.raw, summary=s)
    text = " ".join(verdict.verdict(res))
    frac = 100 * weak["power_W"] / 150.0
    assert f"delivers {report.sig(frac, 3)} %" in text and "of its nominal power" in text
    assert "heater zones (probability 0.90)" in text
    assert "What these readings cannot tell: These readings cannot resolve zone inner" in text
    html = report.render_report(res, figures={})
    assert "share of nominal power" in html and "length scale 40 mm (90 % range 20 to 80 mm)" in html
    assert "axisymmetric part (rings, bands) 4 times as strong as the rest (probability 0.70)" in html
    assert "the rings and bands with edges of their own, as rough as the rest of the face (probability 0.80)" in html
    assert "the smoothest profiles the prior family holds (probability 0.75)" in html
    assert "the longest length scale tried widened from 600 to 5400 mm, as the readings favoured the longest ones" \
        in html


def test_extremes_stand_in_for_zones(demo):
    import copy
    import dataclasses
    s = copy.deepcopy(demo.raw.summary)
    s["zones"] = []
    first = verdict.verdict(dataclasses.replace(demo.raw, summary=s))[0]
    assert first.startswith("The lowest value is ") and "(95 %) at r = 150.0 mm, θ = " in first
    angle = float(re.search(r"at r = 150.0 mm, θ = ([0-9.]+)°", first).group(1))
    assert abs(angle - 150.0) <= 30.0      # truth.json: the weak sector is centred at 150 deg


def test_console_names_the_length_scale_the_readings_chose(demo):
    """Under the learned prior the console says how smooth the answer is in millimetres (the
    length scale and its 90 % range from summary.json's prior), not as a bare strength alpha."""
    lines = summary_lines(demo.raw)
    prior = demo.raw.summary["prior"]
    line = next(ln for ln in lines if "length scale the readings chose" in ln)
    mm = [report.sig(1e3 * x, 2) for x in (prior["length_scale_m"], *prior["length_scale_90_m"])]
    assert f"chose {mm[0]} mm (90 % range {mm[1]} to {mm[2]} mm)" in line
    assert not re.search(r"\d\.\d+e[+-]\d", line) and "smoothing strength" not in " ".join(lines)


def test_a_face_that_passes_heat_out_ranks_zones_by_the_heat_they_pass():
    """A bore that heats the fluid has a negative heat flux into the part: the strongest zone
    is the one passing the most heat (the most negative flux), not the one passing the least
    (invented figures for the check)."""
    import types

    import pandas as pd

    from heatsight.data_io.report_format import _Fmt
    from heatsight.data_io.verdict import zone_sentences

    result = types.SimpleNamespace(quantity="heat_flux", face="bore",
                                   grid=pd.DataFrame({"estimate": [-9000.0, -6000.0]}))
    zones = [{"name": "fouled", "mean": -6000.0, "sd": 50.0, "lower": -6100.0, "upper": -5900.0,
              "deviation_from_face_mean": 1400.0},
             {"name": "clean", "mean": -8500.0, "sd": 50.0, "lower": -8600.0, "upper": -8400.0,
              "deviation_from_face_mean": -1100.0}]
    text = " ".join(zone_sentences({"mean": -7400.0, "zones": zones}, _Fmt(result)))
    assert "The weakest zone is fouled" in text and "The strongest zone is clean" in text
    # and its distance in heat passed: 1400 / 7400 = 19 % less (it said "19 % above the face
    # mean" beside "weakest"), 1100 / 7400 = 15 % more
    assert "19 % less heat out than the face mean" in text and "15 % more heat out than the face mean" in text
    assert "above" not in text and "below" not in text


def test_a_zones_share_of_heat_out_in_words():
    """The rule the console's zone lines and the verdict share: on a face heat leaves through
    '19 % less heat out' where the console printed '(+19 %)' for the zone passing less heat
    (invented figures)."""
    from heatsight.data_io.report_format import flux_relation

    assert flux_relation(1400.0, -7400.0) == ("19 %", "less heat out than")
    assert flux_relation(-1100.0, -7400.0) == ("15 %", "more heat out than")
    assert flux_relation(-1100.0, 7400.0) == ("15 %", "below")


def test_the_widest_band_sentence_writes_its_plus_minus_as_1_96_sd(demo):
    # the glossary's "±" (1.96 sd, report_text.GLOSSARY) holds in the verdict's sentence on the
    # place the readings tell least too, though that place is found by its (mixture) band
    res = demo.raw
    g = res.grid
    i = int(np.nanargmax(np.asarray(g["upper"], float) - np.asarray(g["lower"], float)))
    fmt = verdict._Fmt(res)
    text = verdict.unresolved_sentences(SimpleNamespace(summary={"warnings": []}, warnings=[], grid=g,
                                                        face=res.face, cylinder=res.cylinder), fmt)[0]
    z95 = norm.ppf(0.975)           # the standard normal's 97.5 % point (scipy.stats, reference library)
    want = f"± {verdict.sig(fmt.d.diff(z95 * float(g['std'].iloc[i])), 2)} "
    assert want in text, (want, text)


def test_round_off_band_and_a_long_walls_position():
    """A half-width below 1e-9 of its value is round-off (a long tube's heat through the bore
    is fixed by the outer wall's): '± 0', never '± 2.2e-12'; a long part's wall point has an
    angle and no height (a review found 'z = 0.0 mm' in a long tube's report)."""
    from heatsight.data_io.report_format import _position, pm95_of

    assert pm95_of(1884.956, 1.1e-12, "W/m") == "1884.956 ± 0 W/m (95 %)"
    assert pm95_of(818.2, 0.8, "W") == "818 ± 1.6 W (95 %)"
    at = {"theta_rad": math.radians(340.0), "z_m": 0.0}
    long_tube = SimpleNamespace(face="bore", cylinder=SimpleNamespace(long=True))
    tube = SimpleNamespace(face="bore", cylinder=SimpleNamespace(long=False))
    assert _position(long_tube, at) == "at θ = 340°"
    assert "z = " in _position(tube, at)
