"""Curated source files: vocabularies, BibTeX and one values CSV per source."""
