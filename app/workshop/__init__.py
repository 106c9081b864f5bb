"""The workshop domain: sessions, members, edits, proposals, votes, stages, history.

Pure Python over :mod:`app.graph`; no I/O, no web framework.
"""
