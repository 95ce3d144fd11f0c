# Claybench's image: slim, runs as a user without privileges, everything installed at build time.
#   docker build -t claybench .
# Python packages come from requirements.lock (exact versions with their hashes, made from
# pyproject.toml by `uv pip compile pyproject.toml --python-version 3.11 --generate-hashes -o requirements.lock`),
# so that every build of one commit installs the same code.
FROM python:3.11-slim-bookworm AS build
ENV PIP_DISABLE_PIP_VERSION_CHECK=1 PIP_NO_CACHE_DIR=1
WORKDIR /build
COPY requirements.lock ./
RUN python -m venv /opt/claybench \
 && /opt/claybench/bin/pip install --require-hashes -r requirements.lock

FROM python:3.11-slim-bookworm
# What WeasyPrint needs from the system (its documentation's "Installation": Pango, with
# HarfBuzz's subsetter for embedded fonts) and the fonts the reports are set in.
RUN apt-get update \
 && apt-get install -y --no-install-recommends libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz-subset0 fonts-dejavu-core \
 && rm -rf /var/lib/apt/lists/* \
 && useradd --system --uid 10001 --home-dir /var/lib/claybench --create-home claybench
COPY --from=build /opt/claybench /opt/claybench
WORKDIR /srv/claybench
# The app finds templates/, static/ and migrations/ beside its package (server/config.py ROOT), so
# the package runs from this folder (on PYTHONPATH) rather than from site-packages; the files
# belong to root, and the app's user can read them but not change them.
COPY server ./server
COPY templates ./templates
COPY static ./static
COPY migrations ./migrations
# Alembic reads its settings from pyproject.toml (server/db/migrate.py).
COPY pyproject.toml ./
RUN printf '#!/bin/sh\nexec python -m server.cli "$@"\n' > /usr/local/bin/claybench \
 && chmod 755 /usr/local/bin/claybench
ENV PATH=/opt/claybench/bin:$PATH \
    PYTHONPATH=/srv/claybench \
    PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    CLAYBENCH_ENVIRONMENT=production \
    CLAYBENCH_DATA_DIR=/var/lib/claybench
USER claybench
EXPOSE 8000
HEALTHCHECK --interval=15s --timeout=5s --retries=5 \
  CMD ["python", "-c", "import urllib.request; urllib.request.urlopen('http://127.0.0.1:8000/healthz')"]
CMD ["claybench", "serve", "--host", "0.0.0.0", "--port", "8000"]
