"""Click commands of the `sectio` CLI, one module per job; each imports heavy libraries lazily."""
