"""forward: the exact steady-conduction field of a solid cylinder (physics only).

Knows nothing of data, statistics or files.  SI units and radians throughout.
"""

from .errors import ForwardModelError, IllPosedError
from .faces import (Convection, FaceCondition, Flux, Insulated, Temperature, UnknownFlux,
                    UnknownTemperature, CONDITIONS)
from .geometry import Cylinder, FACE_NAMES
from .model import CylinderModel, FieldValues, UnknownBasis

__all__ = ["Cylinder", "CylinderModel", "FieldValues", "UnknownBasis", "FaceCondition",
           "Temperature", "Flux", "Insulated", "Convection", "UnknownTemperature", "UnknownFlux",
           "CONDITIONS", "FACE_NAMES", "ForwardModelError", "IllPosedError"]
