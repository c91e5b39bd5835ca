"""Study files: the schema of a study file, reading it safely, and resolving it (with the shelf)
into the numerical problem the domain layer solves.  Knows nothing of optuna or of results."""
