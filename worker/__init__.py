"""Boundwise worker side: the RQ job entry, the search engine, domains, heuristics and plan validation.

Nothing here imports ``service``.
"""
