"""Jobs: the only place that combines stages (sampling with planning's assessment, the store with
fits). Commands parse, call a job, render its result.

``sweep`` (uniform or precision-targeted sampling of a target's grid; the sampling half of the
main job), ``status`` (how far each task is), ``review`` (reading an out directory to answer from
it) and ``verify`` (sampling the points a prediction is checked at).
"""
