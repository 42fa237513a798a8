"""How often the consultation (verdict, named structure, first advice) is right, measured by simulation.

Run ``python -m calibration.run`` (or ``make calibrate``): seeded series from known generating
processes go through the service in process (the batch route, ``detail: "full"``), and the rates of
each answer, with their Monte Carlo standard errors, are written to CALIBRATION.md and CALIBRATION.json
beside the targets. ``--quick`` runs tiny sizes (the test suite does that to keep this code working).
Nothing here is imported by the service.
"""
