"""HTML pages: thin routes that parse, authorise, call a service and render a template.

A route answers an htmx request (``HX-Request`` header) with a fragment and any other
request with the full page, at the same URL.
"""
