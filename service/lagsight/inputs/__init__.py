"""Data in: request schemas, CSV bodies, timestamps, missing values, transforms and the prepared series.

Turns validated request fields into the arrays the engine analyses, raising :class:`lagsight.problems.Problem`
for bad input. May import the engine and the shared modules (options, problems); never Flask or the stages above.
"""
