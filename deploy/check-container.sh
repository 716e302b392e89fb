#!/usr/bin/env bash
# Container checks: lint the Dockerfile and validate the Kubernetes manifests (schema, and the
# platform rules of tests/deploy/test_manifests.py), then build the image with podman on a Debian
# base made by debootstrap (OCI labels checked), run it read-only and stop it, and play the
# Deployment with `podman kube play`. In both runs: JSON log lines without terminal escapes, gzip
# both ways, /metrics with one charset and the build-info gauge, the worker count from the CPU
# quota. Installs what it needs (apt, pip); needs root.
#
# Usage: deploy/check-container.sh   (from anywhere; .ci/run calls it after `make test`)
# Environment:
#   TAILGAUGE_BASE_CACHE  where the debootstrap root filesystem is cached between runs
#                         (default /var/tmp/tailgauge-pybase; delete it to refresh the base)
#   DEBIAN_MIRROR         mirror for debootstrap (default http://deb.debian.org/debian)
#   TAILGAUGE_CHECK_IMAGE the image's name (default localhost/tailgauge:check; another name keeps
#                         two checkouts checked on one machine from replacing each other's image)
# The image stays (as localhost/tailgauge:check by default); the containers and the pod it
# starts are removed.
set -euo pipefail
cd "$(dirname "$0")/.."
ROOT=$PWD

export CONTAINERS_CONF="$ROOT/deploy/containers.conf"
CACHE_DIR=${TAILGAUGE_BASE_CACHE:-/var/tmp/tailgauge-pybase}
MIRROR=${DEBIAN_MIRROR:-http://deb.debian.org/debian}
BASE_TARBALL="$CACHE_DIR/bookworm-python3-rootfs.tar"
BASE_IMAGE=localhost/tailgauge-pybase:bookworm
IMAGE=${TAILGAUGE_CHECK_IMAGE:-localhost/tailgauge:check}
HOST_CA=/etc/ssl/certs/ca-certificates.crt
RUN_NAME="tailgauge-check-$$"
KUBE_NAME="tailgauge-check-$$"
# gunicorn's graceful_timeout (deploy/gunicorn.conf.py); a stop must finish well inside it.
GRACEFUL_SECONDS=30
SAMPLE_BODY='{"values":[1,2,3,4,10]}'

WORK=$(mktemp -d /tmp/tailgauge-check.XXXXXX)
ROOTFS=""
RUN_STARTED=0
KUBE_PLAYED=0
STEP_NAMES=()
STEP_SECONDS=()
STEP_NAME=""
STEP_START=""
SCRIPT_START=$EPOCHREALTIME

log() { printf '== %s\n' "$*"; }
fail() {
    printf 'FAIL: %s\n' "$*" >&2
    exit 1
}
elapsed_since() { awk -v a="$1" -v b="$EPOCHREALTIME" 'BEGIN { printf "%.1f", b - a }'; }
step() {
    end_step
    STEP_NAME=$1
    STEP_START=$EPOCHREALTIME
    log "$STEP_NAME"
}
end_step() {
    if [[ -n $STEP_NAME ]]; then
        STEP_NAMES+=("$STEP_NAME")
        STEP_SECONDS+=("$(elapsed_since "$STEP_START")")
        STEP_NAME=""
    fi
}
# Run a noisy command with its output in a log file, shown (the end of it) only on failure.
quietly() {
    local name=$1
    shift
    if ! "$@" >"$WORK/$name.log" 2>&1; then
        tail -n 60 "$WORK/$name.log" >&2
        fail "$name: '$*' failed (log above)"
    fi
}

cleanup() {
    local status=$?
    set +e
    if [[ -n $STEP_NAME ]]; then
        [[ $status -ne 0 ]] && STEP_NAME="$STEP_NAME (failed)"
        end_step
    fi
    if [[ $RUN_STARTED -eq 1 ]]; then
        podman rm --force --time 0 "$RUN_NAME" >/dev/null 2>&1
    fi
    if [[ $KUBE_PLAYED -eq 1 ]]; then
        podman kube down "$WORK/deployment.yaml" >/dev/null 2>&1
    fi
    [[ -n $ROOTFS ]] && rm -rf "$ROOTFS" "$BASE_TARBALL.partial"
    rm -rf "$WORK"
    printf '\n== timing (seconds)\n'
    local i
    for i in "${!STEP_NAMES[@]}"; do
        printf '%8s  %s\n' "${STEP_SECONDS[$i]}" "${STEP_NAMES[$i]}"
    done
    printf '%8s  total\n' "$(elapsed_since "$SCRIPT_START")"
    if [[ $status -eq 0 ]]; then
        printf '== container checks passed\n'
    else
        printf '== container checks FAILED (exit %s)\n' "$status" >&2
    fi
    exit "$status"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

free_port() {
    python3 -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'
}

# Wait until GET $1 answers 200, or fail after $2 seconds; $3 names a container whose exit
# (or whose logs, on a timeout) explains a failure.
wait_for_http() {
    local url=$1 limit=$2 container=$3 deadline=$((SECONDS + $2))
    until curl -fsS --max-time 2 "$url" >/dev/null 2>&1; do
        if [[ -n $container ]] && [[ $(podman inspect --format '{{.State.Running}}' "$container" 2>/dev/null) != true ]]; then
            podman logs "$container" 2>&1 | tail -n 40 >&2
            fail "$container stopped before $url answered"
        fi
        if ((SECONDS >= deadline)); then
            [[ -n $container ]] && podman logs "$container" 2>&1 | tail -n 40 >&2
            fail "$url did not answer 200 within ${limit}s"
        fi
        sleep 0.5
    done
}

# POST the sample to $1 and check the answer. The expected values are hand arithmetic on
# 1, 2, 3, 4, 10: sum 20 so mean 4; middle value 3; squared deviations 9+4+1+0+36 = 50,
# divided by n - 1 = 4 gives the sample variance 12.5.
check_sample_request() {
    local url=$1 answer="$WORK/answer.json"
    curl -fsS --max-time 20 -H 'Content-Type: application/json' -d "$SAMPLE_BODY" -o "$answer" "$url" \
        || fail "POST $url failed"
    python3 - "$answer" <<'EOF' || fail "unexpected answer from $url: $(head -c 400 "$answer")"
import json, sys

d = json.load(open(sys.argv[1]))["descriptors"]
assert d["mean"]["value"] == 4.0, d["mean"]
assert d["median"]["value"] == 3.0, d["median"]
assert abs(d["variance"]["value"] - 12.5) <= 1e-12, d["variance"]
EOF
}

# After exactly one POST to the samples route: /metrics, answered by whichever worker, counts
# it once (the workers' values are summed from files under PROMETHEUS_MULTIPROC_DIR).
# The exposition's type carries one charset, and one tailgauge_build_info series (no pid label)
# names the image's version.
check_metrics() {
    local url=$1
    curl -fsS --max-time 5 -D "$WORK/metrics.headers" -o "$WORK/metrics.txt" "$url" || fail "GET $url failed"
    python3 - "$WORK/metrics.txt" <<'EOF' || fail "$url does not count the one sample request"
import re, sys

pattern = re.compile(r'^tailgauge_http_requests_total\{(?=[^}]*route="/v1/descriptors/samples")'
                     r'(?=[^}]*method="POST")(?=[^}]*status="200")[^}]*\} (\S+)$', re.M)
counts = [float(c) for c in pattern.findall(open(sys.argv[1]).read())]
assert counts == [1.0], counts
EOF
    grep -qix 'content-type: text/plain; version=1.0.0; charset=utf-8'$'\r' "$WORK/metrics.headers" \
        || fail "$url content type: $(grep -i '^content-type' "$WORK/metrics.headers")"
    [[ $(grep -c '^tailgauge_build_info{' "$WORK/metrics.txt") -eq 1 ]] \
        && grep -q "^tailgauge_build_info{.*version=\"$VERSION\".*} 1.0\$" "$WORK/metrics.txt" \
        || fail "$url has not one build-info series of version $VERSION: $(grep build_info "$WORK/metrics.txt")"
}

# The sample gzip-compressed, asking for a gzip answer: both ways must work (the answer, about
# 9 kB of JSON, is above the 1,400-byte threshold).
check_gzip() {
    local url=$1
    printf '%s' "$SAMPLE_BODY" | gzip -c >"$WORK/sample.json.gz"
    curl -fsS --max-time 20 -D "$WORK/gzip.headers" -o "$WORK/gzip-answer.gz" -H 'Content-Type: application/json' \
        -H 'Content-Encoding: gzip' -H 'Accept-Encoding: gzip' --data-binary "@$WORK/sample.json.gz" "$url" \
        || fail "POST $url with a gzip body failed"
    grep -qi '^content-encoding: gzip' "$WORK/gzip.headers" || fail "$url did not answer with gzip"
    grep -qi '^vary: accept-encoding' "$WORK/gzip.headers" || fail "$url answered without Vary: Accept-Encoding"
    gzip -dc "$WORK/gzip-answer.gz" >"$WORK/answer.json" || fail "the gzip answer of $url does not inflate"
    python3 -c 'import json, sys; assert json.load(open(sys.argv[1]))["descriptors"]["mean"]["value"] == 4.0' \
        "$WORK/answer.json" || fail "unexpected gzip answer from $url"
}

# Every line the container wrote is one JSON object, with no terminal escape (raw or as a JSON
# \u001b escape) and no uvicorn color_message field; $2 workers booted.
check_logs() {
    local log=$1 workers=$2
    python3 - "$log" "$workers" <<'EOF' || { tail -n 20 "$log" >&2; fail "the container's log lines are not clean JSON"; }
import json, sys

lines = [line for line in open(sys.argv[1], encoding="utf-8") if line.strip()]
assert lines, "no log lines"
booted = 0
for line in lines:
    assert "\x1b" not in line and "\\u001b" not in line and "\x9b" not in line, line
    record = json.loads(line)
    assert isinstance(record, dict) and "color_message" not in record, line
    booted += str(record.get("message", "")).startswith("Booting worker with pid")
assert booted == int(sys.argv[2]), f"{booted} workers booted, expected {sys.argv[2]}"
EOF
}

[[ $(id -u) -eq 0 ]] || fail "needs root (debootstrap, rootful podman)"

step "install tools (apt, pip)"
missing=()
for tool in podman:podman runc:runc debootstrap:debootstrap curl:curl iptables:iptables python3:python3; do
    command -v "${tool%%:*}" >/dev/null || missing+=("${tool#*:}")
done
if ((${#missing[@]})); then
    log "apt-get install ${missing[*]}"
    quietly apt-update apt-get update -qq
    quietly apt-install env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}"
fi
[[ -x .venv/bin/python ]] || quietly make-install make install
# The container-checks extra of pyproject.toml: its lock, held to the test profile's versions.
quietly pip-install .venv/bin/pip install --require-hashes -r requirements/container-checks.txt

step "hadolint Dockerfile"
.venv/bin/hadolint --failure-threshold warning Dockerfile || fail "hadolint found warnings or errors"

step "kubernetes-validate deploy/k8s"
.venv/bin/kubernetes-validate --strict -k 1.29.0 deploy/k8s/*.yaml 2>&1 | tee "$WORK/validate.log"
[[ ${PIPESTATUS[0]} -eq 0 ]] || fail "kubernetes-validate rejected a manifest"
if grep -q WARN "$WORK/validate.log"; then fail "kubernetes-validate printed a warning"; fi
# What the schema cannot say: spread, NetworkPolicy ports, ServiceAccount, memory, labels.
.venv/bin/python -m pytest -p no:cacheprovider -q tests/deploy/test_manifests.py \
    || fail "the manifests break a platform rule (tests/deploy/test_manifests.py)"

step "base image $BASE_IMAGE"
if podman image exists "$BASE_IMAGE"; then
    log "present in podman storage"
else
    if [[ ! -s $BASE_TARBALL ]]; then
        log "debootstrap bookworm from $MIRROR (cached in $BASE_TARBALL)"
        mkdir -p "$CACHE_DIR"
        ROOTFS=$(mktemp -d "$CACHE_DIR/rootfs.XXXXXX")
        quietly debootstrap debootstrap --variant=minbase --include=python3,python3-venv,ca-certificates \
            bookworm "$ROOTFS" "$MIRROR"
        # Nothing of the host's and no package downloads in the image.
        rm -rf "$ROOTFS"/var/cache/apt/archives/*.deb "$ROOTFS"/var/lib/apt/lists/*
        rm -f "$ROOTFS/etc/resolv.conf" "$ROOTFS/etc/hostname"
        tar -C "$ROOTFS" -cf "$BASE_TARBALL.partial" .
        mv "$BASE_TARBALL.partial" "$BASE_TARBALL"
        rm -rf "$ROOTFS"
        ROOTFS=""
    fi
    quietly import podman import "$BASE_TARBALL" "$BASE_IMAGE"
fi

VERSION=$(.venv/bin/python -c 'import tomllib; print(tomllib.load(open("pyproject.toml", "rb"))["project"]["version"])')
REVISION=$(git rev-parse HEAD 2>/dev/null || echo unknown)
# Workers the quota of $1 CPUs gives (rounded up), never more than this machine's CPUs.
expected_workers() { local w=$1; (($(nproc) < w)) && w=$(nproc); echo "$w"; }

step "podman build $IMAGE"
previous_image=$(podman image inspect --format '{{.Id}}' "$IMAGE" 2>/dev/null || true)
build_volumes=()
# pip in the build verifies PyPI with the host's CA bundle (mounted for the build only).
[[ -r $HOST_CA ]] && build_volumes=(-v "$HOST_CA:/etc/ssl/certs/ca-certificates.crt:ro")
# --layers=false: no intermediate images are left behind to pile up from run to run.
quietly build podman build --format docker --layers=false --pull=never --build-arg "BASE_IMAGE=$BASE_IMAGE" \
    --build-arg "VERSION=$VERSION" --build-arg "REVISION=$REVISION" \
    --build-arg "CREATED=$(date -u +%Y-%m-%dT%H:%M:%SZ)" "${build_volumes[@]}" -t "$IMAGE" .
new_image=$(podman image inspect --format '{{.Id}}' "$IMAGE")
# The image this script built last time, now untagged; nothing else is pruned.
if [[ -n $previous_image && $previous_image != "$new_image" ]]; then
    podman rmi "$previous_image" >/dev/null 2>&1 || true
fi
[[ -n $(podman image inspect --format '{{.Config.Healthcheck}}' "$IMAGE") ]] \
    || fail "the image has no HEALTHCHECK"
[[ $(podman image inspect --format '{{.Config.User}}' "$IMAGE") == 10001:10001 ]] \
    || fail "the image does not run as user 10001"
podman image inspect --format '{{json .Labels}}' "$IMAGE" >"$WORK/labels.json"
python3 - "$WORK/labels.json" "$VERSION" "$REVISION" <<'EOF' || fail "OCI labels: $(cat "$WORK/labels.json")"
import json, sys

labels, version, revision = json.load(open(sys.argv[1])), sys.argv[2], sys.argv[3]
prefix = "org.opencontainers.image."
for key in ("title", "description", "version", "revision", "created", "licenses", "vendor", "source", "base.name"):
    assert labels.get(prefix + key) not in (None, "", "unknown"), key
assert labels[prefix + "version"] == version, (labels[prefix + "version"], version)
assert labels[prefix + "revision"] == revision
EOF

step "worker count from the CPU quota (--cpus 1 and 1.5)"
for quota in 1:1 1.5:2; do
    workers=$(podman run --rm --cpus "${quota%%:*}" --cap-drop=ALL --read-only "$IMAGE" \
        python -c 'from tailgauge.runtime.cpus import default_workers; print(default_workers())') \
        || fail "podman run --cpus ${quota%%:*} failed"
    expected=$(expected_workers "${quota#*:}")
    [[ $workers == "$expected" ]] || fail "--cpus ${quota%%:*}: $workers default workers, expected $expected"
done

step "the image holds the serving profile only"
# Exactly what requirements/serve.txt pins (and pip and tailgauge): no test tool, nothing unlocked.
podman run --rm --network=none --entrypoint /opt/venv/bin/python "$IMAGE" -m pip list --format=freeze \
    >"$WORK/image-packages.txt" 2>"$WORK/image-packages.err" || fail "pip list in the image failed: $(cat "$WORK/image-packages.err")"
.venv/bin/python -m tests.deploy.locks environment requirements/serve.txt "$WORK/image-packages.txt" \
    || fail "the image's packages differ from requirements/serve.txt (above)"
log "$(wc -l <"$WORK/image-packages.txt") packages, as requirements/serve.txt pins them"

step "run read-only on 127.0.0.1, POST a sample"
port=$(free_port)
RUN_STARTED=1
quietly start podman run --detach --name "$RUN_NAME" --read-only --read-only-tmpfs=false \
    --tmpfs /tmp:rw,size=64m,mode=1777 --cap-drop=ALL --security-opt=no-new-privileges \
    --health-interval=disable --cpus 2 --publish "127.0.0.1:$port:8000" "$IMAGE"
wait_for_http "http://127.0.0.1:$port/health/ready" 60 "$RUN_NAME"
curl -fsS --max-time 2 "http://127.0.0.1:$port/health/live" >/dev/null || fail "/health/live did not answer"
check_sample_request "http://127.0.0.1:$port/v1/descriptors/samples"
quietly healthcheck podman healthcheck run "$RUN_NAME"
check_metrics "http://127.0.0.1:$port/metrics"
check_gzip "http://127.0.0.1:$port/v1/descriptors/samples"

step "graceful stop (SIGTERM) with a request in flight"
# A bootstrap request that computes for a second or more, sent just before the SIGTERM: the
# drain must let it finish with 200.
python3 -c 'import json
values = [(i * 7919) % 2003 / 10 for i in range(2000)]
interval = {"method": "bca", "level": 0.95, "resamples": 9999, "seed": 1}
print(json.dumps({"values": values, "options": {"interval": interval}}))' >"$WORK/slow.json"
curl -sS --max-time $((GRACEFUL_SECONDS + 10)) -H 'Content-Type: application/json' --data-binary "@$WORK/slow.json" \
    -o "$WORK/slow-answer.json" -w '%{http_code}' "http://127.0.0.1:$port/v1/descriptors/samples" \
    >"$WORK/slow-status" 2>"$WORK/slow-error" &
slow_request=$!
sleep 1
stop_start=$SECONDS
# Without systemd podman reports that it has no healthcheck timer to remove: kept in a log.
quietly stop podman stop --time $((GRACEFUL_SECONDS + 10)) "$RUN_NAME"
stop_seconds=$((SECONDS - stop_start))
wait "$slow_request" || true
exit_code=$(podman inspect --format '{{.State.ExitCode}}' "$RUN_NAME")
podman logs "$RUN_NAME" >"$WORK/run.log" 2>&1
if [[ $exit_code -ne 0 ]]; then
    tail -n 40 "$WORK/run.log" >&2
    fail "the container exited with $exit_code after SIGTERM (137 means it was killed)"
fi
((stop_seconds < GRACEFUL_SECONDS)) || fail "stopping took ${stop_seconds}s, not under ${GRACEFUL_SECONDS}s"
grep -q "Handling signal: term" "$WORK/run.log" || fail "gunicorn did not log the SIGTERM it handled"
# --cpus 2 without WEB_CONCURRENCY: two workers, from the quota.
check_logs "$WORK/run.log" "$(expected_workers 2)"
[[ $(cat "$WORK/slow-status") == 200 ]] \
    || fail "the request in flight at SIGTERM got '$(cat "$WORK/slow-status")' $(cat "$WORK/slow-error")"
python3 -c 'import json, sys
assert json.load(open(sys.argv[1]))["descriptors"]["mean"]["interval"] is not None' "$WORK/slow-answer.json" \
    || fail "the request in flight at SIGTERM has no interval"
log "the request in flight finished with 200; exit code 0 after ${stop_seconds}s"
quietly rm podman rm "$RUN_NAME"
RUN_STARTED=0

step "podman kube play deploy/k8s/deployment.yaml"
kube_port=$(free_port)
# A copy with the local image, a name of its own, and the port published on 127.0.0.1 only.
.venv/bin/python - deploy/k8s/deployment.yaml "$WORK/deployment.yaml" "$IMAGE" "$KUBE_NAME" "$kube_port" <<'EOF'
import sys

import yaml

source, target, image, name, port = sys.argv[1:]
deployment = yaml.safe_load(open(source))
assert deployment["kind"] == "Deployment", deployment["kind"]
deployment["metadata"]["name"] = name
(container,) = deployment["spec"]["template"]["spec"]["containers"]
container["image"] = image
(http,) = [p for p in container["ports"] if p["name"] == "http"]
http.update(hostIP="127.0.0.1", hostPort=int(port))
yaml.safe_dump(deployment, open(target, "w"), sort_keys=False)
EOF
KUBE_PLAYED=1
quietly kube-play podman kube play "$WORK/deployment.yaml"
# `podman kube play` prints the pod's id, then "Container:" and the application containers' ids.
pod_container=$(awk 'found { print; exit } /^Container/ { found = 1 }' "$WORK/kube-play.log")
[[ -n $pod_container ]] || fail "kube play started no application container: $(cat "$WORK/kube-play.log")"
wait_for_http "http://127.0.0.1:$kube_port/health/ready" 60 "$pod_container"
curl -fsS --max-time 2 "http://127.0.0.1:$kube_port/health/live" >/dev/null || fail "/health/live did not answer in the pod"
check_sample_request "http://127.0.0.1:$kube_port/v1/descriptors/samples"
check_metrics "http://127.0.0.1:$kube_port/metrics"
check_gzip "http://127.0.0.1:$kube_port/v1/descriptors/samples"
[[ $(podman inspect --format '{{.HostConfig.ReadonlyRootfs}}' "$pod_container") == true ]] \
    || fail "the pod's root filesystem is writable (readOnlyRootFilesystem not applied)"
[[ $(podman exec "$pod_container" python -c 'import os; print(os.getuid())') == 10001 ]] \
    || fail "the pod's container does not run as uid 10001"
# The Deployment sets no WEB_CONCURRENCY: its CPU limit (2) sets the worker count.
podman logs "$pod_container" >"$WORK/kube.log" 2>&1
check_logs "$WORK/kube.log" "$(expected_workers 2)"
quietly kube-down podman kube down "$WORK/deployment.yaml"
KUBE_PLAYED=0
end_step
