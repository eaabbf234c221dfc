"""One module per group of CLI commands; each only parses options and calls the library."""
