# waymarkd in a container: built on Debian bookworm with the project's own install script, run
# as a non-root user with the data directory on a volume.
#   docker build -t waymark .
#   docker run -p 7700:7700 -v waymark-data:/var/lib/waymark -e WAYMARK_WRITE_TOKENS=<16+ chars> waymark
# Inside the container the server listens on all interfaces (the port is published by Docker);
# set tokens (and TLS, or a TLS-terminating proxy) before exposing it beyond your machine.

FROM debian:bookworm AS build
WORKDIR /src
COPY scripts/install-dependencies.sh scripts/
RUN bash scripts/install-dependencies.sh && rm -rf /var/lib/apt/lists/*
COPY . .
RUN cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DWAYMARK_BUILD_TESTS=OFF -DWAYMARK_BUILD_BENCHMARKS=OFF \
 && cmake --build build --target waymarkd waymark

FROM debian:bookworm-slim
# The shared libraries waymarkd links (FAISS is linked statically; OpenBLAS serves its BLAS and
# LAPACK; tcmalloc is its allocator), pugixml for the CLI's SVG reader, and curl for the health check.
RUN apt-get update \
 && apt-get install -y --no-install-recommends librocksdb7.8 libspdlog1.10 libfmt9 libopenblas0-pthread libgomp1 \
      libxxhash0 libtcmalloc-minimal4 libssl3 libpugixml1v5 curl \
 && rm -rf /var/lib/apt/lists/* \
 && useradd --system --uid 10001 --home-dir /var/lib/waymark --shell /usr/sbin/nologin waymark \
 && mkdir -p /var/lib/waymark /etc/waymark && chown waymark:waymark /var/lib/waymark
COPY --from=build /src/build/server/waymarkd /src/build/clients/cli/waymark /usr/local/bin/
COPY config/waymarkd.json /etc/waymark/waymarkd.json
USER waymark
VOLUME /var/lib/waymark
# The environment overrides the file (config/README.md).
ENV WAYMARK_DATA_DIRECTORY=/var/lib/waymark \
    WAYMARK_LISTEN_ADDRESS=0.0.0.0 \
    OMP_WAIT_POLICY=PASSIVE
EXPOSE 7700
HEALTHCHECK --interval=15s --timeout=3s --start-period=60s --retries=3 \
  CMD curl -fsS http://127.0.0.1:7700/healthz || exit 1
STOPSIGNAL SIGTERM
ENTRYPOINT ["waymarkd", "--config", "/etc/waymark/waymarkd.json"]
