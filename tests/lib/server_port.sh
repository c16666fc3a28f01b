# Shared by the shell tests and scripts that start sightfix-server on port 0:
# `serving_port LOG [PID]` waits up to 30 s for the server's "serving" line in LOG and prints
# its TCP port (its HTTP port too, as a second word, when it has one); prints nothing and
# returns 1 when the line never comes or PID dies first.
serving_port() {
  local log="$1" pid="${2:-}" line
  for _ in $(seq 1 300); do
    line="$(grep -m1 '"event":"serving"' "$log" 2>/dev/null || true)"
    if [ -n "$line" ]; then
      echo "$line" | sed -E 's/.*"port":([0-9]+),"http_port":([0-9]+).*/\1 \2/; s/ 0$//'
      return 0
    fi
    if [ -n "$pid" ] && ! kill -0 "$pid" 2>/dev/null; then return 1; fi
    sleep 0.1
  done
  return 1
}
