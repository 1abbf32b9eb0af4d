"""The build: the recipe from data to booklets, per-participant jobs, fingerprints and reuse of
the last build, staged output, the job runner and progress."""
