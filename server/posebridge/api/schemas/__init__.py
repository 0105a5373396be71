"""Request and result models of the HTTP API, one module per resource.

They depend on pydantic only; the command line builds its ``--json`` output
with the same models.
"""
