"""The bench page: an ASGI app (Starlette) over the store, served by ``testplan serve``.

Every action calls the same store or importer function the CLI command calls; this package
only reads forms, checks the session and CSRF token, and renders templates/web/.
"""
