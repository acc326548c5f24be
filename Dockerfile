# droopline on Debian 12: built with the project's own set-up script; starts the live service on
# all interfaces with the demo scenario.
#   docker build -t droopline .
#   docker run --rm -p 8080:8080 -e DROOPLINE_TOKEN=choose-a-long-token droopline
FROM debian:12-slim
WORKDIR /src
COPY . /src
RUN apt-get update -qq \
 && bash scripts/dev.sh build \
 && install -m 0755 build/release/server/droopline /usr/local/bin/droopline \
 && rm -rf /var/lib/apt/lists/*
EXPOSE 8080
CMD ["droopline", "serve", "--scenario", "scenarios/demo_three_areas.json", "--listen", "0.0.0.0:8080", \
     "--web", "/src/web", "--journal", "/tmp/droopline-journal.jsonl"]
