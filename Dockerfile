# Lifetime Service: a slim CPython image, dependencies from the project's own hashed lock file,
# a non-root user, no writable file system needed at run time.
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1

WORKDIR /app

# Dependencies first (pinned, with hashes), so that code changes reuse this layer.
COPY requirements.lock ./
RUN pip install --require-hashes -r requirements.lock

# The service itself, without re-resolving dependencies. The commit it is built from is
# recorded in the package (service/build.json), so service_version names it at run time:
#   docker build --build-arg SOURCE_COMMIT="$(git rev-parse HEAD)" .
# Without the argument service_version is the version alone.
ARG SOURCE_COMMIT=""
COPY pyproject.toml setup.py README.md ./
COPY service ./service
RUN python -m service.version --record --commit "$SOURCE_COMMIT" \
    && pip install --no-deps --no-build-isolation . \
    && groupadd --system --gid 10001 lifetime \
    && useradd --system --uid 10001 --gid 10001 --no-create-home --shell /usr/sbin/nologin lifetime

# the same user and group ids as runAsUser and runAsGroup in deploy/kubernetes.yaml
USER 10001:10001

# Listen on every interface inside the container; the stored bases ship in the package and
# another folder can be mounted read-only and named with LIFETIME_BASES_DIR.
ENV LIFETIME_HOST=0.0.0.0 \
    LIFETIME_PORT=8000

EXPOSE 8000

HEALTHCHECK --interval=15s --timeout=3s --start-period=20s --retries=3 \
    CMD ["python", "-c", "import sys, urllib.request; sys.exit(0 if urllib.request.urlopen('http://127.0.0.1:8000/health', timeout=2).status == 200 else 1)"]

CMD ["python", "-m", "service", "--host", "0.0.0.0", "--port", "8000"]
