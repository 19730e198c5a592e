# syntax=docker/dockerfile:1
#
# fugad container image: a static Go binary on a distroless base that has no
# shell, no package manager and runs as an unprivileged numeric user.
#
#   docker build --build-arg VERSION=$(git describe --tags --always) -t fugad:dev .
#   docker run --rm -p 50051:50051 -p 9464:9464 fugad:dev
#
# deploy/deploy_test.go parses this file and checks the invariants the
# Kubernetes manifests rely on (stages, USER, EXPOSE, ENTRYPOINT, static build).

ARG GO_VERSION=1.26

# Build stage. It runs on the build host's platform and cross-compiles for the
# target platform, so multi-platform builds need no emulation.
FROM --platform=$BUILDPLATFORM golang:${GO_VERSION} AS build
WORKDIR /src

# Module downloads form their own layer, rebuilt only when go.mod or go.sum change.
COPY go.mod go.sum ./
RUN --mount=type=cache,target=/go/pkg/mod go mod download

COPY . .
ARG VERSION=dev
ARG TARGETOS
ARG TARGETARCH
RUN --mount=type=cache,target=/go/pkg/mod --mount=type=cache,target=/root/.cache/go-build \
    CGO_ENABLED=0 GOOS=${TARGETOS} GOARCH=${TARGETARCH} \
    go build -trimpath -ldflags "-s -w -X main.version=${VERSION}" -o /out/fugad ./cmd/fugad

# Run stage: distroless static, nonroot variant. UID/GID 65532 is the
# image's "nonroot" user; it is given numerically so that Kubernetes
# runAsNonRoot can verify it without reading /etc/passwd.
FROM gcr.io/distroless/static-debian12:nonroot
ARG VERSION=dev
LABEL org.opencontainers.image.title="fugad" \
      org.opencontainers.image.description="gRPC service for phase behaviour of fluid mixtures (cubic equations of state)" \
      org.opencontainers.image.version="${VERSION}"
COPY --from=build /out/fugad /usr/local/bin/fugad
USER 65532:65532
# 50051: gRPC (fugad.v1.FugadService and grpc.health.v1.Health).
# 9464: Prometheus metrics over HTTP at /metrics.
EXPOSE 50051 9464
ENTRYPOINT ["/usr/local/bin/fugad"]
