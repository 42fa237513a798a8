"""Speed and memory measurements of Lagsight, written to BENCHMARKS.md by ``make bench``.

Run ``python -m benchmarks.run`` (or ``make bench``); ``--quick`` runs every
measurement on tiny sizes (the test suite does that to keep this code working).
Nothing here is imported by the service.
"""
