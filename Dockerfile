# steam-edge: advisory steam plant monitor (reads and computes; never writes to a PLC).
#
#   docker build -t steam-edge .
#   docker run -d --name steam-edge \
#     -v /etc/steam-edge:/etc/steam-edge:ro -v steam-edge-state:/var/lib/steam-edge \
#     -p 127.0.0.1:9847:9847 steam-edge
#
# Volumes: /etc/steam-edge holds config.yaml (and secret files, e.g. api-token, mode 0600
# readable by uid 10001); /var/lib/steam-edge holds the journal (storage.path:
# /var/lib/steam-edge/state.sqlite). Inside a container the monitor must listen on
# 0.0.0.0 to be reachable through -p, so the config needs http.listen: 0.0.0.0:9847 and
# http.token_file: /etc/steam-edge/api-token: without a token it refuses to listen off
# loopback. The health check asks /healthz on port 9847.
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1

WORKDIR /opt/steam-edge
COPY pyproject.toml README.md LICENSE ./
COPY edge ./edge
RUN pip install . \
    && useradd --system --uid 10001 --home-dir /var/lib/steam-edge --shell /usr/sbin/nologin steamedge \
    && install -d -o steamedge -g steamedge -m 0700 /var/lib/steam-edge \
    && install -d -m 0755 /etc/steam-edge

USER steamedge
VOLUME ["/etc/steam-edge", "/var/lib/steam-edge"]
EXPOSE 9847

HEALTHCHECK --interval=30s --timeout=5s --start-period=30s --retries=3 \
    CMD ["python", "-c", "import sys, urllib.request; sys.exit(0 if urllib.request.urlopen('http://127.0.0.1:9847/healthz', timeout=4).status == 200 else 1)"]

STOPSIGNAL SIGTERM
ENTRYPOINT ["steam-edge"]
CMD ["run", "-c", "/etc/steam-edge/config.yaml"]
