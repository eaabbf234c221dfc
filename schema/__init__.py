"""bodyplan's schema: store tables and curated-file descriptors, each declared once."""

from . import descriptors
from .tables import TABLES, BuildInfo, Compartment, InputFile, LifeStage, QuantityDef, Source, Species, Value

__all__ = ["descriptors", "TABLES", "BuildInfo", "Compartment", "InputFile", "LifeStage", "QuantityDef",
           "Source", "Species", "Value"]
