"""The registry of design families: adding a family is one line in ``FAMILIES``."""

from __future__ import annotations

from typing import Annotated, Literal, Union

from pydantic import Field, create_model

from .base import DesignBase, Family, locked
from .synonyms import FAMILY_SYNONYMS, hint
from .chi_square import ChiSquare
from .correlation import Correlation
from .linear_regression import LinearRegression
from .one_proportion import OneProportion
from .equivalence_t import EquivalenceT
from .fisher_exact import FisherExact
from .log_rank import LogRank
from .mann_whitney import MannWhitney
from .noninferiority_t import NonInferiorityT
from .one_sample_t import OneSampleT
from .one_way_anova import OneWayAnova
from .paired_t import PairedT
from .two_proportions import TwoProportions
from .signed_rank import SignedRank
from .two_sample_t import TwoSampleT
from .welch_t import WelchT
from .crossover_2x2 import Crossover2x2
from .ancova import Ancova
from .mcnemar import McNemar
from .poisson_rate import PoissonRate
from .negative_binomial_rate import NegativeBinomialRate
from .many_to_one import ManyToOne
from .factorial_anova import FactorialAnova
from .repeated_measures import RepeatedMeasures
from .logistic_regression import LogisticRegression
from .mixed_design import MixedDesign

__all__ = ["FAMILIES", "family_names", "get_family", "DesignUnion", "UnknownFamily"]

#: Every design family prespec knows, in the order they are listed to users.
FAMILIES: tuple[Family, ...] = (
    OneSampleT(),
    PairedT(),
    TwoSampleT(),
    WelchT(),
    OneWayAnova(),
    TwoProportions(),
    FisherExact(),
    OneProportion(),
    Correlation(),
    ChiSquare(),
    LinearRegression(),
    LogRank(),
    MannWhitney(),
    SignedRank(),
    EquivalenceT(),
    NonInferiorityT(),
    Ancova(),
    Crossover2x2(),
    McNemar(),
    PoissonRate(),
    NegativeBinomialRate(),
    ManyToOne(),
    FactorialAnova(),
    RepeatedMeasures(),
    LogisticRegression(),
    MixedDesign(),
)

_BY_NAME = {family.name: family for family in FAMILIES}


class UnknownFamily(ValueError):
    def __init__(self, name: object) -> None:
        self.name = name
        known = ", ".join(family_names())
        found = hint(name, family_names(), FAMILY_SYNONYMS)
        hint_text = found + ("" if found.endswith("?") else ".")
        super().__init__(f"{name!r} is not a known design family{hint_text} Known families: {known}")


def family_names() -> list[str]:
    return [family.name for family in FAMILIES]


def get_family(name: str) -> Family:
    try:
        return _BY_NAME[name]
    except KeyError:
        raise UnknownFamily(name) from None


def _design_model(family: Family) -> type[DesignBase]:
    camel = "".join(part.capitalize() for part in family.name.split("-"))
    model = create_model(
        f"{camel}Design",
        __base__=DesignBase,
        __doc__=f"design: block for the {family.title}.",
        test=(Literal[family.name], locked(description=f"Design family: {family.title}.")),  # type: ignore[valid-type]
        effect=(family.effect_model, locked(description="The effect to detect, in natural or standardized units.")),
    )
    model.family_instance = family
    return model


for _family in FAMILIES:
    type(_family).design_model = _design_model(_family)
    # found by name here, as pickle looks a class up: a checked spec travels from a worker process
    globals()[type(_family).design_model.__name__] = type(_family).design_model

#: The ``design:`` block of a spec: one model per family, chosen by ``test``.
DesignUnion = Annotated[
    Union[tuple(type(f).design_model for f in FAMILIES)],  # type: ignore[misc]
    Field(discriminator="test"),
]
