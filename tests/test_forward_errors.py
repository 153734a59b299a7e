"""Ill-posed and invalid set-ups are refused with a clear message (why, and what to do).

IllPosedError: no unique steady state exists (design notes section 4: all faces
flux/insulated, net heat with nowhere to go).  ForwardModelError: a set-up the model cannot
take.  No outside values are involved here.
"""

import math

import numpy as np
import pytest

from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, ForwardModelError, IllPosedError,
                     Insulated, Temperature, UnknownFlux, UnknownTemperature)

A, L, K = 0.05, 0.08, 20.0
CYL = Cylinder(A, L, K)
SEMI = Cylinder(A, math.inf, K)


def _model(faces, cyl=CYL):
    return CylinderModel(cyl, faces)


# ------------------------------------------------------------------------ ill-posed


def test_all_flux_with_net_heat_has_nowhere_to_go():
    with pytest.raises(IllPosedError) as e:
        _model({"bottom": Flux(1e4), "side": Insulated(), "top": Flux(-5e3)})
    msg = str(e.value)
    assert "nowhere to go" in msg and "no steady state" in msg
    assert "39.2699 W" in msg  # the net heat input, 5e3 W/m^2 x pi a^2 = 39.2699 W
    assert "make at least one face a temperature or convection condition" in msg


def test_all_flux_with_net_heat_through_side_profile():
    with pytest.raises(IllPosedError, match="nowhere to go"):
        _model({"bottom": Insulated(), "side": Flux(lambda t, z: 1e3 * (1 + np.cos(t))), "top": Insulated()})


@pytest.mark.parametrize("faces", [
    {"bottom": Flux(1e4), "side": Insulated(), "top": Flux(-1e4)},  # balanced: zero net heat
    {"bottom": Insulated(), "side": Insulated(), "top": Insulated()},
    {"bottom": Flux(lambda r, t: 1e4 * np.cos(t)), "side": Insulated(), "top": Insulated()},
    {"bottom": Flux(2e3), "side": Flux(lambda t, z: -2e3 * A / (2 * L) + 0 * z), "top": Insulated()},
])
def test_all_flux_with_zero_net_heat_does_not_fix_the_level(faces):
    with pytest.raises(IllPosedError) as e:
        _model(faces)
    msg = str(e.value)
    assert "no face fixes the temperature level" in msg
    assert "make at least one face a temperature or convection condition" in msg


@pytest.mark.parametrize("unknown_face", ["bottom", "top", "side"])
def test_unknown_flux_with_only_flux_faces(unknown_face):
    faces = {"bottom": Flux(1e3), "side": Insulated(), "top": Insulated()}
    faces[unknown_face] = UnknownFlux()
    with pytest.raises(IllPosedError) as e:
        _model(faces)
    msg = str(e.value)
    assert f"the {unknown_face} heat flux is unknown" in msg
    assert "no face fixes the temperature level" in msg
    assert "temperature or convection" in msg


def test_unknown_flux_with_a_temperature_face_is_fine():
    model = _model({"bottom": UnknownFlux(), "side": Insulated(), "top": Temperature(300.0)})
    assert model.unknown_face == "bottom"


def test_semi_infinite_net_side_flux():
    with pytest.raises(IllPosedError) as e:
        _model({"bottom": Temperature(300.0), "side": Flux(1e3)}, SEMI)
    msg = str(e.value)
    assert "semi-infinite" in msg and "unbounded power" in msg
    assert "give part.height as a length" in msg


def test_semi_infinite_side_flux_without_net_heat_is_fine():
    model = _model({"bottom": Temperature(300.0), "side": Flux(lambda t, z: 1e3 * np.cos(t))}, SEMI)
    assert np.isfinite(model.temperature(0.5 * A, 0.0, 3 * A))


def test_semi_infinite_all_flux():
    with pytest.raises(IllPosedError, match="no face fixes the temperature level"):
        _model({"bottom": Flux(1e3), "side": Insulated()}, SEMI)


# --------------------------------------------------------------- invalid set-ups


def test_two_unknown_faces():
    with pytest.raises(ForwardModelError, match="only one face can be unknown at a time, got bottom, side"):
        _model({"bottom": UnknownFlux(), "side": UnknownTemperature(), "top": Temperature(300.0)})


def test_missing_face():
    with pytest.raises(ForwardModelError, match="missing face"):
        _model({"bottom": Flux(1e3), "side": Temperature(300.0)})


def test_unknown_face_name():
    with pytest.raises(ForwardModelError, match="lid not on this part"):
        _model({"bottom": Flux(1e3), "side": Temperature(300.0), "top": Temperature(300.0),
                "lid": Temperature(300.0)})


def test_top_face_on_semi_infinite_part():
    with pytest.raises(ForwardModelError, match="semi-infinite part has no top face"):
        _model({"bottom": Temperature(300.0), "side": Temperature(300.0), "top": Temperature(300.0)}, SEMI)


@pytest.mark.parametrize("cond", [Flux(1e3), Convection(10.0, 300.0), UnknownFlux()])
def test_missing_conductivity(cond):
    with pytest.raises(ForwardModelError, match="conductivity is needed for the bottom face"):
        CylinderModel(Cylinder(A, L), {"bottom": cond, "side": Temperature(300.0), "top": Temperature(300.0)})


def test_no_conductivity_needed_for_temperature_and_insulated_faces():
    model = CylinderModel(Cylinder(A, L), {"bottom": Temperature(400.0), "side": Insulated(),
                                           "top": UnknownTemperature()})
    assert model.temperature(0.0, 0.0, 0.0) == pytest.approx(400.0)


@pytest.mark.parametrize("radius", [-0.05, 0.0, math.inf, math.nan])
def test_bad_radius(radius):
    with pytest.raises(ForwardModelError, match="radius must be a positive length"):
        Cylinder(radius, L, K)


@pytest.mark.parametrize("height", [-1.0, 0.0, math.nan])
def test_bad_height(height):
    with pytest.raises(ForwardModelError, match="height must be a positive length or infinite"):
        Cylinder(A, height, K)


@pytest.mark.parametrize("k", [-1.0, 0.0, math.inf])
def test_bad_conductivity(k):
    with pytest.raises(ForwardModelError, match="conductivity must be a positive value"):
        Cylinder(A, L, k)


@pytest.mark.parametrize("point", [(1.01 * A, 0.0, 0.01), (0.01, 0.0, -0.001), (0.01, 0.0, 1.01 * L),
                                   (-0.01, 0.0, 0.01)])
def test_point_outside_the_part(point):
    model = _model({"bottom": Flux(1e3), "side": Temperature(300.0), "top": Temperature(300.0)})
    with pytest.raises(ForwardModelError, match="outside the part"):
        model.evaluate(*point)
    with pytest.raises(ForwardModelError, match="point 2 .* is outside the part"):
        model.evaluate([0.01, point[0]], [0.0, point[1]], [0.01, point[2]])


def test_point_not_finite():
    model = _model({"bottom": Flux(1e3), "side": Temperature(300.0), "top": Temperature(300.0)})
    with pytest.raises(ForwardModelError, match="finite coordinates"):
        model.evaluate(math.nan, 0.0, 0.01)


def test_point_outside_semi_infinite_part_and_far_points_inside():
    model = _model({"bottom": Temperature(330.0), "side": Temperature(300.0)}, SEMI)
    with pytest.raises(ForwardModelError, match="outside the part"):
        model.evaluate(0.01, 0.0, -0.01)
    assert model.temperature(0.0, 0.0, 1e3) == pytest.approx(300.0)


def test_unknown_side_on_semi_infinite_part():
    with pytest.raises(ForwardModelError, match="an unknown side needs a finite height"):
        _model({"bottom": Temperature(300.0), "side": UnknownTemperature()}, SEMI)
    with pytest.raises(ForwardModelError, match="an unknown side needs a finite height"):
        _model({"bottom": Temperature(300.0), "side": UnknownFlux()}, SEMI)


@pytest.mark.parametrize("side", [Temperature(lambda t, z: 300.0 + 100.0 * z),
                                  Convection(20.0, lambda t, z: 300.0 + 5.0 * np.sin(z / A)),
                                  Flux(lambda t, z: 1e3 * np.cos(t) * (1 + z))])
def test_side_profile_varying_along_z_on_semi_infinite_part(side):
    with pytest.raises(ForwardModelError, match="vary along z") as e:
        _model({"bottom": Temperature(300.0), "side": side}, SEMI)
    assert "give part.height as a length" in str(e.value)


def test_basis_without_unknown_face():
    model = _model({"bottom": Flux(1e3), "side": Temperature(300.0), "top": Temperature(300.0)})
    with pytest.raises(ForwardModelError, match="no unknown face"):
        model.basis(1, 2)


@pytest.mark.parametrize("make, match", [
    (lambda: Temperature(-1.0), "above absolute zero"),
    (lambda: Temperature(0.0), "above absolute zero"),
    (lambda: Convection(-1.0, 300.0), "must be a positive number"),
    (lambda: Convection(0.0, 300.0), "must be a positive number"),
    (lambda: Flux(math.nan), "must be finite"),
    (lambda: Flux("hot"), "must be a number or a profile"),
])
def test_bad_face_values(make, match):
    with pytest.raises(ForwardModelError, match=match):
        make()


def test_not_a_face_condition():
    with pytest.raises(ForwardModelError, match="not a face condition"):
        _model({"bottom": 1e3, "side": Temperature(300.0), "top": Temperature(300.0)})


def test_ill_posed_is_a_forward_model_error():
    # callers catching ForwardModelError also see the ill-posed case
    assert issubclass(IllPosedError, ForwardModelError)
    assert issubclass(ForwardModelError, ValueError)
