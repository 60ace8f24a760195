# syntax=docker/dockerfile:1
#
# kelvard's container image: a static binary on a distroless base, run as
# an unprivileged numeric user. Build with
#
#   docker build --build-arg VERSION=$(git describe --always) -t kelvard .
#
# deploy/dockerfile_test.go runs this file's `go build` line and checks that it
# makes a static binary, and checks the rules below (stages, user, port,
# entrypoint).

ARG GO_VERSION=1.26

FROM golang:${GO_VERSION}-bookworm AS build
WORKDIR /src
# Modules first, so a change to the code alone reuses this layer.
COPY go.mod go.sum ./
RUN --mount=type=cache,target=/go/pkg/mod go mod download
COPY . .
ARG VERSION=dev
# Pure Go (the embedded SQLite store included), so no C toolchain and no
# libc in the image.
RUN --mount=type=cache,target=/go/pkg/mod --mount=type=cache,target=/root/.cache/go-build \
    CGO_ENABLED=0 GOFLAGS=-buildvcs=false go build -trimpath -ldflags "-s -w -X main.version=${VERSION}" -o /out/kelvard .

# distroless static: CA certificates and /etc/passwd, no shell, no package
# manager. Time zone data is compiled into the binary (time/tzdata).
FROM gcr.io/distroless/static-debian12:nonroot
COPY --from=build /out/kelvard /usr/local/bin/kelvard
# Without KELVARD_DATABASE_URL kelvard writes ./kelvard.db; the nonroot
# user's home is writable.
WORKDIR /home/nonroot
USER 65532:65532
EXPOSE 8080
# No HEALTHCHECK: the image has no shell or client to run one. Orchestrators
# probe GET /healthz (alive) and GET /readyz (database answers, migrations
# current) instead.
ENTRYPOINT ["/usr/local/bin/kelvard", "serve"]
