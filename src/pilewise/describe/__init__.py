"""Describe stage: per-cluster summaries and evidence, profiles, rules, names and run comparisons."""
