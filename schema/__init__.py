"""bodyplan's schema: store tables and curated-file descriptors, each declared once."""

from . import descriptors
from .tables import (TABLES, BodySurfaceFormula, BuildInfo, Compartment, Group, InputFile, LifeStage, Method, Part,
                     QuantityDef, Source, Species, SpeciesClass, Value)

__all__ = ["descriptors", "TABLES", "BodySurfaceFormula", "BuildInfo", "Compartment", "Group", "InputFile",
           "LifeStage", "Method", "Part", "QuantityDef", "Source", "Species", "SpeciesClass", "Value"]
