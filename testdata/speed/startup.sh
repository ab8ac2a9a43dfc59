#!/usr/bin/env bash
# Start-up time of `stackfit report FILE` on a one-layer stack, against the
# floor of any Go process here: an empty `package main; func main(){}`.
#
# Both programs are built with the same toolchain and default `go build`
# flags into a temporary folder. The two are then run in alternating pairs
# (hello, stackfit, hello, stackfit, ...) so that both see the same machine
# noise; each run is timed from spawn to exit with Python's
# time.perf_counter around os.posix_spawn and os.waitpid (output to
# /dev/null). The script prints both medians, their ratio and PASS or FAIL
# against the 1.5× goal, then the binary's size, how many packages
# `go list -deps .` links and whether any tensor or dataframe library is
# among them.
#
# Run from the repository root:
#     bash testdata/speed/startup.sh            # 200 pairs
#     PAIRS=500 bash testdata/speed/startup.sh  # more pairs on a noisy box
# GO selects the toolchain (default: go on PATH, else /usr/local/go/bin/go).
set -euo pipefail

pairs=${PAIRS:-200}
goal=1.5
GO=${GO:-$(command -v go || echo /usr/local/go/bin/go)}
python=/usr/bin/python3
[ -x "$python" ] || python=$(command -v python3)

tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

"$GO" build -o "$tmp/stackfit" .
mkdir "$tmp/hello"
cat >"$tmp/hello/main.go" <<'EOF'
package main

func main() {}
EOF
(cd "$tmp/hello" && "$GO" mod init hello >/dev/null 2>&1 && "$GO" build -o "$tmp/hello-bin" .)

cat >"$tmp/one.yaml" <<'EOF'
stackfit: 1
input: [3, 32, 32]
layers:
  - {conv: 16, kernel: 3}
EOF

# One check run: the report must succeed before it is timed.
"$tmp/stackfit" report "$tmp/one.yaml" >/dev/null

"$python" - "$pairs" "$goal" "$tmp/hello-bin" "$tmp/stackfit" "$tmp/one.yaml" <<'EOF'
import os
import statistics
import sys
import time

pairs, goal = int(sys.argv[1]), float(sys.argv[2])
hello = [sys.argv[3]]
stackfit = [sys.argv[4], "report", sys.argv[5]]
null = os.open(os.devnull, os.O_WRONLY)
actions = [(os.POSIX_SPAWN_DUP2, null, 1), (os.POSIX_SPAWN_DUP2, null, 2)]


def once(argv):
    start = time.perf_counter()
    pid = os.posix_spawn(argv[0], argv, os.environ, file_actions=actions)
    _, status = os.waitpid(pid, 0)
    took = time.perf_counter() - start
    if status != 0:
        sys.exit(f"{argv} failed: status {status}")
    return took


for _ in range(10):  # warm the page cache for both binaries
    once(hello)
    once(stackfit)
h, s = [], []
for _ in range(pairs):
    h.append(once(hello))
    s.append(once(stackfit))
mh, ms = statistics.median(h), statistics.median(s)
ratio = ms / mh
print(f"pairs:            {pairs}")
print(f"hello median:     {mh * 1e3:.2f} ms")
print(f"stackfit median:  {ms * 1e3:.2f} ms  (stackfit report, one layer)")
print(f"ratio:            {ratio:.2f}x  (goal at most {goal}x)")
print("PASS" if ratio <= goal else "FAIL")
EOF

size=$(stat -c %s "$tmp/stackfit")
echo "binary size:      $size bytes ($((size / 1024)) KiB)"
if command -v ldd >/dev/null && ldd "$tmp/stackfit" >/dev/null 2>&1; then
	echo "linking:          dynamic"
else
	echo "linking:          static"
fi
deps=$("$GO" list -deps .)
echo "packages linked:  $(wc -l <<<"$deps") (go list -deps .)"
tensor=$(grep -E 'gorgonia|gonum|arrow|flatbuffers' <<<"$deps" || true)
if [ -n "$tensor" ]; then
	echo "tensor/dataframe libraries linked:"
	sed 's/^/  /' <<<"$tensor"
else
	echo "tensor/dataframe libraries linked: none"
fi
