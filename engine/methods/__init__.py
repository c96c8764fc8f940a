"""The sampling methods, by the names users give to ``engine.fit(method=...)``."""
from __future__ import annotations

from ..errors import ModelError
from .base import Sampler
from .composition import Composition
from .inversion import Inversion, NumericalInversion
from .leva import LevaNormal
from .ratio_of_uniforms import RatioOfUniforms
from .rejection import Rejection
from .table import TableSampler

#: method name -> the class whose ``build`` serves it
METHODS: dict[str, type[Sampler]] = {
    "inversion": Inversion,
    "rejection": Rejection,
    "ratio-of-uniforms": RatioOfUniforms,
    "table": TableSampler,
    "composition": Composition,
}

_ALL_CLASSES: dict[str, type[Sampler]] = {
    cls.__name__: cls for cls in (Inversion, NumericalInversion, Rejection, RatioOfUniforms, LevaNormal,
                                  TableSampler, Composition)}


def register(name: str | None, *classes: type[Sampler]) -> None:
    """Make classes loadable from saved files; ``name`` also exposes the first to ``fit``."""
    if name:
        METHODS[name] = classes[0]
    for cls in classes:
        _ALL_CLASSES[cls.__name__] = cls


def sampler_class(class_name: str) -> type[Sampler]:
    if class_name not in _ALL_CLASSES:
        raise ModelError("path", f"unknown sampler class {class_name!r} in the file")
    return _ALL_CLASSES[class_name]


def method_names() -> list[str]:
    return ["auto", *METHODS]
