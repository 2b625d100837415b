"""Output stage: the output folder's safety, CSV/JSON exports, figures and the static site."""
