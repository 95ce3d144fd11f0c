"""Persistence: tables, the database connection, write transactions and queries."""
