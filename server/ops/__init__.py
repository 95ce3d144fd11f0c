"""Operations on a whole installation rather than on one record: backup and restore.

These sit beside the services (the CLI calls them) but work below the use-cases: a backup copies
every table as the database holds it, audit trail and issued files included, so it goes through
the database's own copying tools and never through the records' rules.
"""
