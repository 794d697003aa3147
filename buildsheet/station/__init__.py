"""The build-day station: a small local web application over the record store.

``buildsheet serve SPEC`` runs it (uvicorn). Modules: ``app`` (Starlette routes), ``ledger_api``
(the one place that talks to the record store and the packet), ``views`` (typed page contexts),
``security`` (CSRF tokens, organiser PIN), ``plot`` (SVG of a sweep), ``server`` (start-up).
"""
