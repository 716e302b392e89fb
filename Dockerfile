# Tailgauge service image: gunicorn with uvicorn workers, as a non-root user, on a read-only root
# filesystem with a writable /tmp (a tmpfs or an emptyDir volume).
#
# The base is a build argument so that any Debian-like image with python3 and its venv module
# can stand in for the official one (deploy/check-container.sh builds on a base made by
# debootstrap). Both stages use the same base: the virtual environment built in the first
# stage refers to its interpreter by path, which must exist in the second.
ARG BASE_IMAGE=docker.io/library/python:3.11-slim-bookworm

FROM ${BASE_IMAGE} AS build
ENV PIP_DISABLE_PIP_VERSION_CHECK=1 \
    PIP_NO_CACHE_DIR=1
WORKDIR /src
RUN python3 -m venv /opt/venv
COPY pyproject.toml README.md ./
COPY requirements/serve.txt ./requirements/
COPY service ./service
# The serving profile only (the `server` extra): every version pinned with its hashes in
# requirements/serve.txt, build backend included; then the project itself, non-editable, from
# nothing but what is installed (--no-index: a requirement missing from the lock fails the build).
RUN /opt/venv/bin/pip install --no-cache-dir --require-hashes -r requirements/serve.txt \
    && /opt/venv/bin/pip install --no-cache-dir --no-index --no-build-isolation '.[server]'

FROM ${BASE_IMAGE} AS runtime
# OCI image annotations (github.com/opencontainers/image-spec, annotations.md). VERSION must equal
# pyproject.toml's version (deploy/check-container.sh checks it); REVISION and CREATED are given
# by the build (the check passes the commit and the time). The URL is a placeholder, like the
# image name in deploy/k8s.
ARG BASE_IMAGE
ARG VERSION=0.1.0
ARG REVISION=unknown
ARG CREATED=unknown
LABEL org.opencontainers.image.title="tailgauge" \
      org.opencontainers.image.description="Descriptors of a distribution over HTTP, with named estimator conventions." \
      org.opencontainers.image.version="${VERSION}" \
      org.opencontainers.image.revision="${REVISION}" \
      org.opencontainers.image.created="${CREATED}" \
      org.opencontainers.image.licenses="LicenseRef-Proprietary" \
      org.opencontainers.image.vendor="Tailgauge maintainers" \
      org.opencontainers.image.source="https://git.example.com/tailgauge/tailgauge" \
      org.opencontainers.image.base.name="${BASE_IMAGE}"
# PROMETHEUS_MULTIPROC_DIR lives under /tmp because the root filesystem is read-only;
# deploy/gunicorn.conf.py creates it at start.
ENV PATH=/opt/venv/bin:$PATH \
    PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    BIND=0.0.0.0:8000 \
    WORKER_TMP_DIR=/tmp \
    PROMETHEUS_MULTIPROC_DIR=/tmp/tailgauge-metrics
RUN groupadd --system --gid 10001 tailgauge \
    && useradd --system --uid 10001 --gid 10001 --no-create-home --home-dir /nonexistent \
       --shell /usr/sbin/nologin tailgauge
COPY --from=build /opt/venv /opt/venv
COPY deploy/gunicorn.conf.py /app/deploy/gunicorn.conf.py
WORKDIR /app
# Numeric, so that Kubernetes can verify runAsNonRoot without reading /etc/passwd.
USER 10001:10001
EXPOSE 8000
# gunicorn drains on SIGTERM within its graceful_timeout (30 s); give `docker stop -t` more.
STOPSIGNAL SIGTERM
HEALTHCHECK --interval=30s --timeout=5s --start-period=30s --retries=3 \
    CMD ["python", "-c", "import urllib.request; urllib.request.urlopen('http://127.0.0.1:8000/health/ready', timeout=4)"]
CMD ["gunicorn", "--config", "deploy/gunicorn.conf.py", "tailgauge.asgi:app"]
