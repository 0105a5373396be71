"""HTTP API and web page of posebridge (FastAPI).

Import :func:`posebridge.api.app.create_app` for the ASGI application and
:func:`posebridge.api.server.run_server` to serve it. The result schemas in
:mod:`posebridge.api.schemas` depend on pydantic only, so the command line
can build the same JSON without importing FastAPI.
"""
