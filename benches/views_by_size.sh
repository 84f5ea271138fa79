#!/usr/bin/env bash
# Lift map and project home on invented projects of several sizes, on SQLite and on
# PostgreSQL, in one run: the first view after a cold start, then p50/p95 of each view
# right after a new test (a POST, then the page). Prints one line per (engine, size).
#   bash benches/views_by_size.sh                      # 30000 and 300000 tests, both engines
#   SIZES="30000 300000 1000000" ENGINES=sqlite bash benches/views_by_size.sh
# Needs a release build (built here), curl, python3, and PostgreSQL on 127.0.0.1:5432.
set -u
SIZES=${SIZES:-"30000 300000"}; ENGINES=${ENGINES:-"sqlite postgres"}; RUNS=${RUNS:-20}
PG=${PG:-postgres://postgres@127.0.0.1:5432}
cargo build --release --quiet || exit 1
BIN=$(readlink -f "${CARGO_TARGET_DIR:-target}/release/liftledger")
T=$(mktemp -d); pid=0
cleanup() { [ "$pid" -gt 0 ] && kill "$pid" 2>/dev/null; wait 2>/dev/null; rm -rf "$T"; }
trap cleanup EXIT
port() { python3 -c 'import socket;s=socket.socket();s.bind(("127.0.0.1",0));print(s.getsockname()[1])'; }
ms() { python3 -c "import sys; v=sorted(float(x)*1000 for x in sys.argv[1:]); p=lambda q: v[min(len(v)-1,int(q*len(v)))]; print(f'p50 {p(0.5):.1f} ms, p95 {p(0.95):.1f} ms')" "$@"; }
for engine in $ENGINES; do for n in $SIZES; do
  if [ "$engine" = sqlite ]; then db="$T/v$n.sqlite"; else
    name=views_bench_$n; psql -h 127.0.0.1 -U postgres -d test -qc "drop database if exists $name with (force)" -c "create database $name" >/dev/null 2>&1
    db="$PG/$name"; fi
  "$BIN" generate --db "$db" --tests "$n" --code BIG > "$T/gen.txt" 2>/dev/null || { echo "$engine $n: generate failed"; continue; }
  project=$(grep -o 'project_id=[0-9]*' "$T/gen.txt" | cut -d= -f2)
  echo "bench-pass-1" | "$BIN" user add --db "$db" --username bench --name "Bench" --admin >/dev/null 2>&1
  "$BIN" user grant --db "$db" --username bench --project BIG --role qc_manager >/dev/null 2>&1
  "$BIN" rejudge --db "$db" >/dev/null 2>&1   # summaries stored before the cold start
  P=$(port); B=http://127.0.0.1:$P
  started=$(date +%s.%N)
  "$BIN" serve --db "$db" --addr "127.0.0.1:$P" > "$T/serve.log" 2>&1 & pid=$!
  until curl -s -o /dev/null "$B/sign-in"; do sleep 0.02; done
  curl -s -c "$T/j" -o /dev/null -H "Origin: $B" --data-urlencode username=bench --data-urlencode password=bench-pass-1 "$B/sign-in"
  cold_map=$(curl -s -b "$T/j" -o /dev/null -w '%{time_total}' "$B/projects/$project/map")
  cold_home=$(curl -s -b "$T/j" -o /dev/null -w '%{time_total}' "$B/projects/$project")
  read -r lot ch < <(curl -s -b "$T/j" "$B/api/v1/projects/$project/lots?per_page=1000" | python3 -c 'import json,sys; l=[x for x in json.load(sys.stdin)["lots"] if x["state"]=="open"][0]; print(l["id"], (l["chainage_from_m"]+l["chainage_to_m"])/2)')
  body="{\"technician\":\"Bench\",\"chainage_m\":$ch,\"offset_m\":1.0,\"readings\":{\"method\":\"nuclear\",\"wet_density_kg_m3\":2130,\"moisture_density_kg_m3\":160}}"
  maps=(); homes=()
  for i in $(seq 1 "$RUNS"); do
    curl -s -b "$T/j" -o /dev/null -H "Origin: $B" -H 'content-type: application/json' -d "$body" "$B/api/v1/lots/$lot/field-tests"
    maps+=("$(curl -s -b "$T/j" -o /dev/null -w '%{time_total}' "$B/projects/$project/map")")
    curl -s -b "$T/j" -o /dev/null -H "Origin: $B" -H 'content-type: application/json' -d "$body" "$B/api/v1/lots/$lot/field-tests"
    homes+=("$(curl -s -b "$T/j" -o /dev/null -w '%{time_total}' "$B/projects/$project")")
  done
  tests=$(grep -o ' tests=[0-9]*' "$T/gen.txt" | cut -d= -f2)
  printf '%-8s %8s tests: first view after start: map %.0f ms, home %.0f ms; after a new test: map %s; home %s\n' \
    "$engine" "$tests" "$(python3 -c "print($cold_map*1000)")" "$(python3 -c "print($cold_home*1000)")" "$(ms "${maps[@]}")" "$(ms "${homes[@]}")"
  kill $pid; wait $pid 2>/dev/null; pid=0
  [ "$engine" = postgres ] && psql -h 127.0.0.1 -U postgres -d test -qc "drop database if exists views_bench_$n with (force)" >/dev/null 2>&1
done; done
