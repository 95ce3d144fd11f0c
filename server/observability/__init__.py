"""What an operator needs to run Claybench: a request id on every log line, JSON logs, metrics.

``request_id`` holds the id of the request being served, ``logs`` writes one JSON object per log
line, ``metrics`` keeps the Prometheus counters and serves them on a port of their own, and
``middleware`` is the one pass over each request that feeds all three.
"""
