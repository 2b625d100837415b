"""Vectors stage: the analyzer, counts, TF-IDF and LSA, in memory or streamed."""
