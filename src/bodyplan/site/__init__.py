"""The read-only site: datasette over the store, with bodyplan metadata and provenance."""
