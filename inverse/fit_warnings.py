"""inverse.fit's notes and warnings: series truncation at a sensor, the layout of the kept
sensors (layout.py), misfit of the answer and what the readings cannot resolve (resolution.py)."""

from __future__ import annotations

import numpy as np

from .functionals import face_functionals
from .layout import FAR_FRACTION, angular_note, edge_gap_note
from .resolution import unresolved_warning

#: reduced chi-square above which the readings scatter more than stated (common practice, no source)
CHI2_WARNING = 4.0


def truncation_warnings(ev, rd):
    trunc = ev.truncation_error
    if not np.any(trunc > 0.1 * rd.sigma):
        return []
    worst = int(np.argmax(trunc / rd.sigma))
    return [f"series truncation error at sensor {rd.names[worst]} is {trunc[worst]:.2g} K, "
            "more than a tenth of its sigma; the sensor may sit very close to a face with data"]


def misfit_warnings(screen):
    alpha = screen.choice.alpha
    chi2 = float(screen.problem.chi2(alpha))
    dof = int(screen.kept.sum()) - float(screen.problem.effective_parameters(alpha))
    if dof > 2 and chi2 / max(dof, 1.0) > CHI2_WARNING:
        return [f"the readings scatter more than their stated uncertainty allows (chi2 = {chi2:.3g} "
                f"for {dof:.1f} degrees of freedom): check sigma, the face conditions or the sensor positions"]
    return []


def layout_warnings(face, cyl, rd, steps=None, quantity="heat_flux"):
    """Layout notes for the kept sensors `rd`; steps: the fit's StretchSteps or None (the
    edge-stretch note says whether this fit lets the stretch depart)."""
    out = []
    out += [note for note in (angular_note(face, cyl.radius, rd.r, rd.theta),
                              edge_gap_note(face, cyl, rd.r, rd.z, steps is not None, quantity)) if note]
    dist = cyl.depth(face, rd.r, rd.z)
    size, what = (cyl.thickness, "wall thickness") if cyl.hollow else (cyl.radius, "radius")
    if dist.size and dist.min() > FAR_FRACTION * size:
        out.append(f"the nearest sensor is {dist.min() * 1e3:.3g} mm from the unknown face "
                   f"(over {FAR_FRACTION:.0%} of the {what}): fine detail of the profile is unresolved")
    return out


def unresolved_warnings(post, screen, columns, design, spec, rd):
    """The one "cannot resolve" warning (resolution.py) for the smooth model's answer."""
    if columns is not design:
        return []
    text = unresolved_warning(post, screen.problem, face_functionals(design, spec.zones or []),
                              spec.unknown_face, rd.offset_sd[screen.kept], spec.options.common_offset_sd)
    return [text] if text else []
