"""Ingest stage: reading SOURCE into documents, redaction, boilerplate and near-duplicates."""
