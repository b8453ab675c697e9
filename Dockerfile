# syntax=docker/dockerfile:1
# Build stage: compile better-sqlite3 from source (no prebuilt download) and the TypeScript.
FROM node:20-bookworm-slim AS build
RUN apt-get update \
 && apt-get install -y --no-install-recommends python3 make g++ \
 && rm -rf /var/lib/apt/lists/*
WORKDIR /app
COPY package.json package-lock.json ./
RUN npm ci
COPY tsconfig.json tsconfig.build.json ./
COPY src ./src
RUN npm run build && npm prune --omit=dev

# Run stage: the compiled service, its migrations and the demo bundle, as a non-root user.
FROM node:20-bookworm-slim
ENV NODE_ENV=production \
    PLUMBLINE_HOST=0.0.0.0 \
    PLUMBLINE_PORT=8080 \
    PLUMBLINE_MODELS_DIR=/models \
    PLUMBLINE_DB=/data/plumbline.db
WORKDIR /app
COPY --from=build /app/node_modules ./node_modules
COPY --from=build /app/dist ./dist
COPY package.json ./
COPY migrations ./migrations
COPY demo-data/models /models
RUN mkdir -p /data && chown -R node:node /data /models
USER node
VOLUME ["/data", "/models"]
EXPOSE 8080
HEALTHCHECK --interval=15s --timeout=3s --start-period=10s --retries=3 \
  CMD node -e "fetch('http://127.0.0.1:8080/healthz').then(r => process.exit(r.ok ? 0 : 1), () => process.exit(1))"
ENTRYPOINT ["node", "dist/cli/main.js"]
CMD ["serve"]
