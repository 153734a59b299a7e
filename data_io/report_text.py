"""The words and the look of the HTML report (data_io.report): figure captions, glossary,
cautions and the style sheet.  Our own wording and colours."""

from __future__ import annotations

from ..inverse.contamination import EPSILON, OUTLIER_SD

FIGURE_CAPTIONS = {
    "face_map": "The estimated face. Dashed outlines: the heater zones of the case. Markers: "
                "thermocouples projected onto the face; a cross marks a sensor set aside. The colour "
                "scale spans at least the typical 95 % band around the face mean, so differences "
                "smaller than the uncertainty do not show as a pattern.",
    "band_width": "Width of the 95 % band of the estimate. Narrow near the sensors, wide where no "
                  "sensor looks.",
    "profiles": "The estimate along lines of the face: the strongest (hottest) and the weakest (coldest) line (bold), "
                "two more for context; shading between dashed edges is the 95 % band.",
    "sensors": "Per sensor: reading minus its prediction from the other sensors (whiskers ±2 sd, "
               "about 95 %) and the residual of the fit; below, the score against the set-aside limit.",
    "strength": "How smooth the estimate was made: how well each smoothing strength explains the "
                "readings, and the trade-off between misfit to the readings and roughness of the face.",
}

#: captions that differ on a long part, whose wall is drawn as theta curves (data_io.wall_curve)
LONG_CAPTIONS = {
    "face_map": "The estimated wall against the angle around the axis (nothing varies along a long "
                "part): the line is the estimate, the shading its 95 % band, grey spans the zones of "
                "the case, ticks at the bottom the thermocouples' angles.",
    "band_width": "Width of the 95 % band of the estimate around the axis. Narrow at the sensors' "
                  "angles, wide between them.",
    "profiles": "The estimate around the axis with its 95 % band (a long part has no second direction "
                "to draw lines along).",
}

#: added to CAUTIONS for a hollow part (a tube, barrel or vessel wall)
HOLLOW_CAUTION = ("A tube, barrel or vessel may hold hot fluid under pressure. Drilling thermocouple "
                  "holes in its wall weakens it: the pressure-equipment rules that apply at your site, "
                  "and a competent person's assessment, come first.")

CAUTIONS = (
    "Heated hardware can burn. A part, its fixtures and the air around it can stay hot long "
    "after the heater is switched off.",
    "Heaters are electrical equipment. Work on heaters, wiring and thermocouples only as your "
    "site's electrical-safety rules allow.",
    "The numbers and maps in this report are estimates from a model fitted to a few readings. "
    "They support engineering judgement; they do not replace direct measurement, interlocks or "
    "inspection.",
    "Local codes and licensed practice govern the design, operation and maintenance of heated "
    "equipment.",
)

CSS = """
section.verdict { background: #eef4f8; border-left: 5px solid var(--accent); padding: 8px 16px 6px;
                  margin: 12px 0 8px; font-size: 1.04em; }
section.verdict p { margin: 4px 0 6px; }
section.verdict ul { margin: 4px 0 6px; padding-left: 20px; }
dl.glossary dt { font-weight: 600; margin-top: 6px; }
dl.glossary dd { margin: 0 0 0 18px; color: var(--ink); }

:root { --ink: #1d232a; --muted: #5a6470; --line: #d5dbe1; --band: #f3f6f8;
        --aside: #fbe3e6; --suspect: #fdf1d6; --accent: #1f5f8b; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #ffffff;
       font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
main { max-width: 1060px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 1.55em; margin: 0 0 4px; }
h2 { font-size: 1.2em; margin: 32px 0 10px; padding-bottom: 4px;
     border-bottom: 2px solid var(--accent); }
h3 { font-size: 1.02em; margin: 20px 0 8px; }
p.sub { color: var(--muted); margin: 0 0 10px; }
nav { font-size: 0.9em; color: var(--muted); margin: 10px 0 0; }
nav a { color: var(--accent); margin-right: 12px; text-decoration: none; }
table { border-collapse: collapse; margin: 6px 0 12px; font-size: 0.92em; }
th, td { border: 1px solid var(--line); padding: 4px 8px; vertical-align: top; }
th { background: var(--band); text-align: left; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.kv th { width: 15em; }
tr.set-aside td { background: var(--aside); }
tr.suspect td { background: var(--suspect); }
.tag { display: inline-block; padding: 0 6px; border-radius: 3px; font-size: 0.85em; }
.tag.set-aside { background: #d03c50; color: #fff; }
.tag.suspect { background: #f0b43c; color: #1d232a; }
.tag.ok { background: #e3ecf2; color: #1d232a; }
ul.warnings li { margin-bottom: 4px; }
figure { margin: 14px 0 22px; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: 0.9em; margin-top: 4px; }
section.cautions { background: #fff7e8; border-left: 5px solid #d08a00;
                   padding: 4px 16px 10px; margin-top: 32px; }
section.cautions h2 { border-bottom: none; }
footer { color: var(--muted); font-size: 0.82em; margin-top: 28px; }
"""



#: (term, meaning): the few terms that stay in the report
GLOSSARY = (
    ("± … (95 %)", "1.96 standard deviations of the answer, over the models and smoothing settings "
                   "the fit weighs: with the model's assumptions the true value lies within this "
                   "distance of the estimate with about 95 % probability (exactly so when the settings "
                   "agree; where they disagree the answer's tails are heavier, and the 95 % band "
                   "below gives its exact 2.5 and 97.5 % points)."),
    ("95 % band", "the 95 % interval at each point of the face, drawn as shading or as a width map: the "
                  "2.5 and 97.5 % points of the answer averaged over the models and smoothing settings the "
                  "fit weighs, so it can sit unevenly about the estimate and is not always 1.96 "
                  "standard deviations either side of it."),
    ("face mean", "the average of the estimated quantity over the whole estimated face."),
    ("zone", "a region of the face named in the case file, such as the area under one heater."),
    ("prediction from the others", "what the fit of all other sensors predicts at a sensor's "
                                   "position (leave-one-out); a faulty or misplaced thermocouple "
                                   "stands out against it."),
    ("score", "reading minus the prediction from the others, in its predictive standard deviations, "
              "over the smoothing strengths the fit weighs: the number the screening decides on. "
              "The prediction and its ± are that same prediction's mean and 95 % interval "
              "(1.96 standard deviations; sensors.csv's loo_sd_K); sensors.csv's standardized_loo "
              "is reading minus prediction over that sd, which the score matches except where the "
              "strengths disagree and the prediction's tails are heavier."),
    ("caught offset", "the smallest fixed offset of a reading that the check against the others "
                      "would catch: half the width of the range of readings the prediction from the "
                      "others accepts (the limit times its standard deviation, for one smoothing "
                      "strength). A sensor alone on its part of the face has a large one: the others "
                      "check it only for large faults, and the answer there rests on it."),
    ("fault probability", "the chance that a sensor's reading is broken, given what the others predict "
                          f"(a broken reading taken as scattered by about {OUTLIER_SD:g} K about the truth, "
                          f"{100 * EPSILON:g} % of sensors broken beforehand). When it is high for a sensor "
                          "the screening kept, the answer blends the fit with that sensor and the fit "
                          "without it."),
    ("set aside", "left out of the fit because its score is beyond the limit; its reading is still "
                  "listed."),
    ("smoothing strength α", "how strongly the fit prefers a smooth face over following every reading; "
                             "chosen from the data (the evidence: how probable the readings are "
                             "for each α)."),
    ("chi-square", "the sum of squared misfits, each in units of its reading's uncertainty."),
)
