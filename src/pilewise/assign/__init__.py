"""New documents into a saved run: the run's model files (`saved`), placing texts (`placing`), the command
(`command`). Kept free of imports, so that the pipeline can import `saved` without a cycle."""
