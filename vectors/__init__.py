"""Golden vector sets: stimulus, expected outputs, file writers, manifests, checker."""
