"""Running a project: the notebook steps, chunks, the whole run and the streamed CLI run."""
