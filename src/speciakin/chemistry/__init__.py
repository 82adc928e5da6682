"""Chemistry layer: sites, microstates, water, the reaction model and its file."""
