#!/bin/sh
# Load on loopback for docs/performance.md ("The register on the web under
# load"): cairn serve as a cairn_reader login over DB, TestLoad's runs
# (mark pages, bbox queries and their 304s at 64 and 256 clients), then the
# pgbench floor of the same statements. Reads only.
#
#   scripts/load-web.sh DB_URL_AS_READER AREA OUT [MAX_CONNS]
#   scripts/load-web.sh 'postgres://cairn_web@127.0.0.1:5432/cairn_national_1m?sslmode=disable' \
#       -108,38,-99.8,44.3 /tmp/load-1m.txt
#
# Environment: CAIRN (the cairn binary, default ./cairn built here),
# SECONDS_EACH (30), CLIENTS (64,256), PGBENCH_CLIENTS (4 64),
# PGBENCH (/usr/lib/postgresql/15/bin/pgbench), MARKS (1000000).
set -eu
db=$1 area=$2 out=$3 maxconns=${4:-0}
here=$(cd "$(dirname "$0")/.." && pwd)
cairn=${CAIRN:-$here/cairn}
[ -x "$cairn" ] || (cd "$here" && go build -o "$cairn" ./cmd/cairn)
secs=${SECONDS_EACH:-30}
port=18090
"$cairn" serve --db "$db" --listen 127.0.0.1:$port --max-conns "$maxconns" 2>"$out.access.log" &
pid=$!
trap 'kill $pid 2>/dev/null || true' EXIT
sleep 2
echo "# $(date -u +%FT%TZ) serve --max-conns $maxconns over $db" >>"$out"
(cd "$here" && CAIRN_LOAD_URL=http://127.0.0.1:$port CAIRN_LOAD_AREA=$area CAIRN_LOAD_SECONDS=$secs \
	CAIRN_LOAD_CLIENTS=${CLIENTS:-64,256} CAIRN_LOAD_OUT=$out \
	go test -count=1 -timeout 30m -run '^TestLoad$' -v ./internal/web/loadgen/) || echo "TestLoad failed" >>"$out"
kill $pid; wait $pid 2>/dev/null || true
trap - EXIT
pgbench=${PGBENCH:-/usr/lib/postgresql/15/bin/pgbench}
w=${area%%,*}; rest=${area#*,}; s=${rest%%,*}; rest=${rest#*,}; e=${rest%%,*}; n=${rest#*,}
dir=$here/internal/web/loadgen/pgbench
for c in ${PGBENCH_CLIENTS:-4 64}; do
	for script in mark bbox; do
		echo "# $(date -u +%FT%TZ) pgbench $script.sql -c $c -T $secs" >>"$out"
		PGOPTIONS='-c jit=off -c default_transaction_read_only=on' "$pgbench" -n -M prepared -f "$dir/$script.sql" \
			-D marks=${MARKS:-1000000} -D west=$w -D south=$s -D east=$e -D north=$n -D box=0.05 -D limit=100 \
			-c "$c" -j 2 -T "$secs" "$db" 2>&1 | grep -E 'processed|failed|latency|tps' >>"$out" || echo "pgbench $script -c $c failed" >>"$out"
	done
done
