# droopline on Debian 12: builds with the project's own set-up script and runs the demo.
#   docker build -t droopline .
#   docker run --rm -v "$PWD/out:/src/out" droopline            # the demo scenario
#   docker run --rm droopline droopline check scenarios/demo_three_areas.json
FROM debian:12-slim
WORKDIR /src
COPY . /src
RUN apt-get update -qq \
 && bash scripts/dev.sh build \
 && install -m 0755 build/release/server/droopline /usr/local/bin/droopline \
 && rm -rf /var/lib/apt/lists/*
CMD ["droopline", "run", "scenarios/demo_island.json", "--out", "out/demo"]
