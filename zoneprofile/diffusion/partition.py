"""Plagioclase–melt partitioning of trace elements as a function of An content.

Notes
-----
The models here share one form (Bindeman, Davis & Drake 1998)::

    RT ln K = A · X_An + B        K = C_plagioclase / C_melt

with A and B in J/mol, T in K, R = 8.314462618 J mol⁻¹ K⁻¹. In the diffusion
equation the chemical-potential term uses A/RT (REFERENCES: flux
J = −D ∂C/∂x + (A/RT)·D·C·∂X_An/∂x), so a zone in equilibrium with a melt of
concentration C_melt holds C = C_melt · exp((A·X_An + B)/RT).

A model is data in :data:`PARTITION_MODELS`. Another model family (e.g. a
lattice-strain model) plugs in by subclassing :class:`PartitionModel` and
implementing ``rt_ln_k_j_mol``; ``a_j_mol`` must then return the local slope
d(RT ln K)/dX_An used by the diffusion equation.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.diffusion.laws._base import R_J_MOL_K, _as_float_array, _fmt, _span

__all__ = [
    "PartitionModel",
    "LinearPartitionModel",
    "PARTITION_MODELS",
    "DEFAULT_PARTITION_MODEL",
    "get_partition_model",
    "register_partition_model",
    "partition_coefficient",
    "partition_parameters",
    "partition_range_warnings",
]

DEFAULT_PARTITION_MODEL = "bindeman1998"


def _x_an(x_an) -> np.ndarray:
    a = _as_float_array(x_an, "x_an")
    out_of = (a < -0.02) | (a > 1.02)  # same slack for analytical noise as the laws
    if np.any(out_of):
        bad = a[out_of][0]
        message = f"x_an must be a mole fraction between 0 and 1 (An mol% / 100), got {_fmt(bad)}"
        raise InputError(message)
    return a


def _t_k(temperature_c) -> np.ndarray:
    t = _as_float_array(temperature_c, "temperature_c")
    if np.any(t <= -273.15):
        raise InputError("temperature_c must be above absolute zero (-273.15 °C)")
    return t + 273.15


@dataclass(frozen=True)
class PartitionModel:
    """A plagioclase–melt partition model (base type; see :class:`LinearPartitionModel`).

    Attributes
    ----------
    id, citation, doi, status, formula : str
        Identity and provenance; ``status`` says how sure the numbers are.
    elements : tuple
        Elements the model covers.
    x_an_range : tuple or None
        Calibrated X_An range (fractions); outside it :meth:`range_warnings` warns.
    t_range_c : tuple or None
        Calibrated temperature range (°C), where known.
    notes : str
        Caveats in plain words.
    """

    id: str
    citation: str
    doi: str | None
    status: str
    formula: str
    elements: tuple = ()
    x_an_range: tuple | None = None
    t_range_c: tuple | None = None
    notes: str = ""

    family = "base"

    def _element(self, element) -> str:
        key = str(element).strip().lower()
        for name in self.elements:
            if name.lower() == key:
                return name
        message = (
            f"partition model {self.id} has no values for {element}; "
            f"it covers {', '.join(self.elements)}"
        )
        raise InputError(message)

    def rt_ln_k_j_mol(self, element, x_an, temperature_c) -> np.ndarray:  # pragma: no cover
        """RT ln K in J/mol."""
        raise NotImplementedError

    def a_j_mol(self, element, x_an=None, temperature_c=None) -> np.ndarray:  # pragma: no cover
        """d(RT ln K)/dX_An in J/mol (the A of the chemical-potential term)."""
        raise NotImplementedError

    def coefficient(self, element, x_an, temperature_c) -> np.ndarray:
        """K = C_plagioclase / C_melt, broadcast over ``x_an`` and ``temperature_c``."""
        t_k = _t_k(temperature_c)
        return np.exp(self.rt_ln_k_j_mol(element, x_an, temperature_c) / (R_J_MOL_K * t_k))

    def range_warnings(self, element=None, x_an=None, temperature_c=None) -> list[str]:
        """Plain sentences for inputs outside the model's calibrated range."""
        out = []
        if element is not None:
            self._element(element)
        if x_an is not None and self.x_an_range is not None:
            a = _x_an(x_an)
            lo, hi = self.x_an_range
            bad = a[(a < lo) | (a > hi)]
            if bad.size:
                what = _span(bad, a.size, "", "X_An")
                out.append(
                    f"{what} outside the calibrated range {_fmt(lo)}–{_fmt(hi)} "
                    f"of the partition model {self.id}"
                )
        if temperature_c is not None and self.t_range_c is not None:
            t = _as_float_array(temperature_c, "temperature_c")
            lo, hi = self.t_range_c
            bad = t[(t < lo) | (t > hi)]
            if bad.size:
                what = _span(bad, t.size, "°C", "temperature")
                out.append(
                    f"{what} outside the calibrated range {_fmt(lo)}–{_fmt(hi)} °C "
                    f"of the partition model {self.id}"
                )
        return out

    def to_dict(self) -> dict:
        return {
            "id": self.id,
            "family": self.family,
            "citation": self.citation,
            "doi": self.doi,
            "status": self.status,
            "formula": self.formula,
            "elements": list(self.elements),
            "x_an_range": None if self.x_an_range is None else list(self.x_an_range),
            "t_range_c": None if self.t_range_c is None else list(self.t_range_c),
            "notes": self.notes,
        }


@dataclass(frozen=True)
class LinearPartitionModel(PartitionModel):
    """RT ln K = A·X_An + B with constant A, B (J/mol) per element.

    ``coefficients`` maps element -> (A_j_mol, B_j_mol).
    """

    coefficients: dict = field(default_factory=dict)

    family = "linear-rt-ln-k"

    def __post_init__(self):
        if not self.elements:
            object.__setattr__(self, "elements", tuple(self.coefficients))

    def parameters(self, element) -> tuple[float, float]:
        """(A_j_mol, B_j_mol) for ``element``."""
        a, b = self.coefficients[self._element(element)]
        return float(a), float(b)

    def a_j_mol(self, element, x_an=None, temperature_c=None):
        return self.parameters(element)[0]

    def rt_ln_k_j_mol(self, element, x_an, temperature_c=None) -> np.ndarray:
        a, b = self.parameters(element)
        return a * _x_an(x_an) + b

    def to_dict(self) -> dict:
        d = super().to_dict()
        d["coefficients_j_mol"] = {
            el: {"A_j_mol": float(a), "B_j_mol": float(b)} for el, (a, b) in self.coefficients.items()
        }
        return d


BINDEMAN1998 = LinearPartitionModel(
    id="bindeman1998",
    citation=(
        "Bindeman I.N., Davis A.M., Drake M.J. (1998) Ion microprobe study of plagioclase–basalt "
        "partition experiments at natural concentration levels of trace elements. "
        "Geochimica et Cosmochimica Acta 62:1175–1193"
    ),
    doi="10.1016/S0016-7037(98)00047-7",
    status="form and X_An range CONFIRMED; A and B FROM MEMORY",
    formula="RT ln K = A·X_An + B  (K = C_plag/C_melt; A, B in J/mol)",
    # kJ/mol values from REFERENCES §4 (FROM MEMORY), stored in J/mol
    coefficients={"Mg": (-26.1e3, -25.7e3), "Sr": (-30.4e3, 28.5e3), "Ba": (-55.0e3, 19.1e3)},
    x_an_range=(0.4, 0.8),
    notes="A and B are recalled, not checked against the paper; verify them before publishing.",
)

BLUNDY_WOOD1991 = LinearPartitionModel(
    id="blundy-wood1991",
    citation=(
        "Blundy J.D., Wood B.J. (1991) Crystal-chemical controls on the partitioning of Sr and "
        "Ba between plagioclase feldspar, silicate melts, and hydrothermal solutions. "
        "Geochimica et Cosmochimica Acta 55:193–209"
    ),
    doi="10.1016/0016-7037(91)90411-W",
    status="FROM MEMORY",
    formula="RT ln K_Sr = 26 800 − 26 700·X_An  (J/mol)",
    coefficients={"Sr": (-26.7e3, 26.8e3)},
    x_an_range=None,
    notes=(
        "Sr only. Coefficients recalled, not checked against the paper; "
        "the calibrated X_An range is not verified, so no range warning is given."
    ),
)

#: id -> partition model. Add a model by defining it as data and adding it here
#: (or through :func:`register_partition_model`).
PARTITION_MODELS: dict[str, PartitionModel] = {m.id: m for m in (BINDEMAN1998, BLUNDY_WOOD1991)}
_BUILT_IN = frozenset(PARTITION_MODELS)


def get_partition_model(model=DEFAULT_PARTITION_MODEL) -> PartitionModel:
    """The partition model registered as ``model`` (a model object passes through)."""
    if isinstance(model, PartitionModel):
        return model
    key = str(model).strip().lower()
    if key not in PARTITION_MODELS:
        message = f"unknown partition model '{model}'; known models: {', '.join(PARTITION_MODELS)}"
        raise InputError(message)
    return PARTITION_MODELS[key]


def register_partition_model(model: PartitionModel, *, replace: bool = False) -> PartitionModel:
    """Add ``model`` to :data:`PARTITION_MODELS` (built-in ids are never replaced)."""
    if not isinstance(model, PartitionModel):
        raise InputError(f"register_partition_model needs a PartitionModel, got {type(model).__name__}")
    if model.id in _BUILT_IN or (model.id in PARTITION_MODELS and not replace):
        raise InputError(f"partition model id '{model.id}' is already registered; choose another id")
    PARTITION_MODELS[model.id] = model
    return model


def partition_coefficient(element, x_an, temperature_c, *, model=DEFAULT_PARTITION_MODEL) -> np.ndarray:
    """Plagioclase–melt partition coefficient K = C_plag / C_melt.

    Parameters
    ----------
    element : str
        ``"Mg"``, ``"Sr"`` or ``"Ba"`` (what the model covers).
    x_an : float or array
        Anorthite mole fraction (An mol% / 100).
    temperature_c : float or array
        Temperature in °C; broadcast against ``x_an``.
    model : str or PartitionModel
        Registry id (default ``"bindeman1998"``).

    Notes
    -----
    K = exp((A·X_An + B)/RT) for the linear models (Bindeman et al. 1998,
    doi:10.1016/S0016-7037(98)00047-7).
    """
    return np.asarray(get_partition_model(model).coefficient(element, x_an, temperature_c), dtype=float)


def partition_parameters(element, *, model=DEFAULT_PARTITION_MODEL) -> tuple[float, float]:
    """(A_j_mol, B_j_mol) of RT ln K = A·X_An + B for ``element`` in a linear model."""
    m = get_partition_model(model)
    if not hasattr(m, "parameters"):
        message = f"partition model {m.id} is not of the form RT ln K = A·X_An + B"
        raise InputError(message)
    return m.parameters(element)


def partition_range_warnings(element, x_an, temperature_c=None, *, model=DEFAULT_PARTITION_MODEL) -> list[str]:
    """Plain sentences for X_An (or T) outside the model's calibrated range."""
    return get_partition_model(model).range_warnings(element, x_an, temperature_c)
