"""Use-cases: each is one function, one database transaction, with its audit events inside it.

Routes (pages, API, CLI) parse and authorise, then call exactly one of these. Only this layer
commits (through ``Database.transaction``).
"""
