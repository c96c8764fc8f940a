"""The sampling methods, by the names users give to ``engine.fit(method=...)``."""
from __future__ import annotations

from ..errors import ModelError
from .base import Sampler
from .inversion import Inversion, NumericalInversion

#: method name -> the class whose ``build`` serves it
METHODS: dict[str, type[Sampler]] = {
    "inversion": Inversion,
}

_ALL_CLASSES = {cls.__name__: cls for cls in (Inversion, NumericalInversion)}


def register(name: str, cls: type[Sampler]) -> None:
    METHODS[name] = cls
    _ALL_CLASSES[cls.__name__] = cls


def sampler_class(class_name: str) -> type[Sampler]:
    if class_name not in _ALL_CLASSES:
        raise ModelError("path", f"unknown sampler class {class_name!r} in the file")
    return _ALL_CLASSES[class_name]


def method_names() -> list[str]:
    return ["auto", *METHODS]
