#!/usr/bin/env bash
# MPI leg of scripts/test: `mpirun -n 2 radmode track` must write the same table as the
# threaded run of the same binary. $1 = radmode built with -DRADMODE_MPI=ON.
# --allow-run-as-root: CI runs as root; --oversubscribe: more ranks than cores is fine here.
set -u
radmode="$1"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail=0
check() {
  local what="$1"; shift
  if "$@"; then echo "ok: $what"; else echo "FAIL: $what"; fail=1; fi
}
for i in 0 1 2 3 4 5 6; do
  "$radmode" make polytrope --index 3 --points 400 --gamma1 "1.3$i" --output "$tmp/m$i.txt"
  echo "# age_myr = $i" | cat - "$tmp/m$i.txt" > "$tmp/a$i.txt"
  echo "a$i.txt" >> "$tmp/list.txt"
  [ "$i" = 3 ] && { echo "not a model" > "$tmp/bad.txt"; echo "bad.txt" >> "$tmp/list.txt"; }
done
"$radmode" track --list "$tmp/list.txt" --jobs 2 -q -o "$tmp/threads.csv"
check "threaded run: exit 21 (one bad model)" [ $? = 21 ]
mpirun="mpirun --allow-run-as-root --oversubscribe"
timeout 300 $mpirun -n 2 "$radmode" track --list "$tmp/list.txt" -q -o "$tmp/mpi.csv" \
  > "$tmp/mpi.log" 2>&1
rc=$?
check "mpirun -n 2: exit status 21 passed on (got $rc)" [ "$rc" = 21 ]
check "mpirun -n 2 table equals the threaded table" cmp "$tmp/threads.csv" "$tmp/mpi.csv"
"$radmode" track --list "$tmp/list.txt" --jobs 1 --json -q -o "$tmp/threads.json"
timeout 300 $mpirun -n 3 "$radmode" track --list "$tmp/list.txt" --json -q -o "$tmp/mpi.json" \
  > "$tmp/mpi3.log" 2>&1
check "mpirun -n 3 JSON equals the threaded JSON" cmp "$tmp/threads.json" "$tmp/mpi.json"
[ "$fail" = 0 ] || cat "$tmp/mpi.log" "$tmp/mpi3.log"
exit $fail
