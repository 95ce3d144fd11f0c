"""The JSON API under /api/v1: the same services as the pages, documented in OpenAPI."""
