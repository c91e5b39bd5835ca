"""Running studies: the search pipeline over optuna, trial storage, batches and workers, and the
results folder of a finished study."""
