"""Movies and figures of a run."""
