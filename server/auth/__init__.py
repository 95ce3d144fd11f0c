"""Who is asking: password hashes, the signed session, CSRF tokens, role checks."""
