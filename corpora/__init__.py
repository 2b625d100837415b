"""Collections: the invented demo generator and loaders for open labeled corpora."""
