"""Running a study: resources and limits, schedulers, the pipeline and its figures."""
