"""Engines that run the work that grows with a collection somewhere else than this process (Spark)."""
