# syntax=docker/dockerfile:1
#
# pairflow in a container (docs/operations.md "Deployment"): a build stage compiles the
# TypeScript, a runtime stage carries only the compiled code and the production
# dependencies, and runs as the unprivileged `node` user (uid 1000) of the official image.
#
#   docker build -t pairflow .
#   docker run --rm pairflow replay replay-logs/demo-day.jsonl.gz
#   docker run --rm -p 9464:9464 pairflow live --brokers HOST:9092 --in events --out pf --group pf --metrics-port 9464
#
# Validated here without a Docker engine (hadolint, BuildKit's Dockerfile parser); see
# docs/operations.md "What was checked, and what was not".

ARG NODE_IMAGE=node:20-bookworm-slim

FROM ${NODE_IMAGE} AS build
WORKDIR /src
# Dependencies first: this layer is rebuilt only when the lock file changes.
COPY package.json package-lock.json ./
# --ignore-scripts: no dependency pairflow ships needs an install script (the ones that
# have one are test tools, dropped below).
RUN npm ci --no-audit --no-fund --ignore-scripts
COPY tsconfig.json tsconfig.build.json ./
COPY src ./src
RUN npm run build \
 && npm prune --omit=dev --no-audit --no-fund --ignore-scripts

FROM ${NODE_IMAGE} AS runtime
ENV NODE_ENV=production
WORKDIR /app
COPY --from=build /src/node_modules ./node_modules
COPY --from=build /src/dist ./dist
COPY package.json ./
COPY bin ./bin
COPY schemas ./schemas
# The bundled demo day, for `pairflow replay` and the compose demo publisher (4 MB).
COPY replay-logs ./replay-logs
# Files stay owned by root and read-only to the process; it writes nothing here. The
# official image's `node` user, by number: Kubernetes' runAsNonRoot can only verify a
# numeric user.
USER 1000:1000
# --metrics-port is off unless given; 9464 is the port the compose file and the docs use.
EXPOSE 9464
# Exec form: pairflow is PID 1 and receives SIGTERM itself (clean shutdown, docs/operations.md).
ENTRYPOINT ["node", "bin/pairflow.js"]
CMD ["--help"]
