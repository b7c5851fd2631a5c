"""Persistence: every read and write of the database goes through these modules.

Functions take the session and keyword-only arguments; inputs are named `*_in`, rows `db_*`.
They raise server.errors types with the field named, and never commit half a change.
"""
