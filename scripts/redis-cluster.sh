#!/usr/bin/env bash
# Starts or stops a throwaway local Redis Cluster of 3 masters (no replicas, no persistence) for the
# integration tests and the benchmark. Data lives under .redis-cluster/ in the repo (gitignored).
#
#   bash scripts/redis-cluster.sh start    # prints the seed ports, e.g. "27001 27002 27003"; also writes .redis-cluster/ports
#   bash scripts/redis-cluster.sh status   # exit 0 and print the ports when the cluster is up and cluster_state:ok
#   bash scripts/redis-cluster.sh stop     # kills the nodes this script started and removes .redis-cluster/
#
# Idempotent: `start` on a running healthy cluster only prints its ports; `stop` with nothing running is a no-op.
# Ports: REDIS_CLUSTER_PORTS="p1 p2 p3" picks them; otherwise three free ports (each with its bus port
# p+10000 free) are chosen at random in 20000-29999.
set -euo pipefail

root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
dir="$root/.redis-cluster"
ports_file="$dir/ports"
mkdir -p "$dir"

# One start/stop at a time (test files and the benchmark may call this concurrently).
exec 9>"$dir/.lock"
flock -w 60 9

port_free() {
  ! (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null
}

healthy() {
  [[ -f "$ports_file" ]] || return 1
  local p
  for p in $(cat "$ports_file"); do
    redis-cli -p "$p" cluster info 2>/dev/null | grep -q '^cluster_state:ok' || return 1
  done
}

stop_nodes() {
  local pidf pid
  for pidf in "$dir"/*/redis.pid; do
    [[ -f "$pidf" ]] || continue
    pid="$(cat "$pidf")"
    # Only a redis-server this script started (the pid file is ours) is killed, by its pid.
    if kill -0 "$pid" 2>/dev/null && grep -q redis-server "/proc/$pid/cmdline" 2>/dev/null; then
      kill "$pid" 2>/dev/null || true
      for _ in $(seq 1 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
      kill -9 "$pid" 2>/dev/null || true
    fi
  done
  find "$dir" -mindepth 1 -maxdepth 1 ! -name .lock -exec rm -rf {} +
}

case "${1:-}" in
  status)
    if healthy; then cat "$ports_file"; exit 0; fi
    echo "redis cluster: not running" >&2
    exit 1
    ;;
  stop)
    stop_nodes
    echo "redis cluster: stopped" >&2
    ;;
  start)
    if healthy; then
      echo "redis cluster: already running" >&2
      cat "$ports_file"
      exit 0
    fi
    stop_nodes
    if [[ -n "${REDIS_CLUSTER_PORTS:-}" ]]; then
      read -r -a ports <<<"$REDIS_CLUSTER_PORTS"
    else
      ports=()
      while ((${#ports[@]} < 3)); do
        p=$((20000 + RANDOM % 10000))
        [[ " ${ports[*]} " == *" $p "* ]] && continue
        port_free "$p" && port_free "$((p + 10000))" && ports+=("$p")
      done
    fi
    for p in "${ports[@]}"; do
      mkdir -p "$dir/$p"
      redis-server --port "$p" --bind 127.0.0.1 --cluster-enabled yes --cluster-config-file "$dir/$p/nodes.conf" \
        --cluster-node-timeout 5000 --dir "$dir/$p" --save '' --appendonly no \
        --daemonize yes --pidfile "$dir/$p/redis.pid" --logfile "$dir/$p/redis.log" 9>&-
    done
    for p in "${ports[@]}"; do
      for _ in $(seq 1 100); do redis-cli -p "$p" ping >/dev/null 2>&1 && break; sleep 0.05; done
    done
    args=()
    for p in "${ports[@]}"; do args+=("127.0.0.1:$p"); done
    redis-cli --cluster create "${args[@]}" --cluster-replicas 0 --cluster-yes >"$dir/create.log" 2>&1 || {
      cat "$dir/create.log" >&2
      stop_nodes
      exit 1
    }
    echo "${ports[*]}" >"$ports_file"
    for _ in $(seq 1 200); do
      if healthy; then
        cat "$ports_file"
        exit 0
      fi
      sleep 0.1
    done
    echo "redis cluster: cluster_state did not become ok in 20 s; see $dir/*/redis.log" >&2
    exit 1
    ;;
  *)
    echo "usage: bash scripts/redis-cluster.sh start|status|stop" >&2
    exit 2
    ;;
esac
