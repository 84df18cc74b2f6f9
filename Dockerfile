# One image for the job service's API and workers: the package installed once, at build time.
#
#   docker compose build        # after each change to the code
#   docker compose up -d --scale worker=4
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1 \
    NUMBA_CACHE_DIR=/cache/numba

WORKDIR /src
COPY pyproject.toml README.md ./
COPY tuneopt ./tuneopt
RUN pip install . \
    && useradd --system --uid 10001 --home-dir /nonexistent --shell /usr/sbin/nologin tuneopt \
    && mkdir -p /cache/numba /scratch \
    && chown tuneopt /cache/numba /scratch

WORKDIR /scratch
USER tuneopt
CMD ["tuneopt", "worker"]
