#!/usr/bin/env bash
# The one-command demo: installs what is needed, builds build/mitilog,
# starts `mitilog serve` with its embedded SQLite database under
# demo-data/, feeds it four weeks of a fictional department's ultrasound
# traffic over DICOM (DCMTK's storescu, the real network path), prints
# where to look, and keeps the daemon running until Ctrl-C.
#
# Running it again: a daemon left by an earlier run is stopped, the
# database is kept, and the same simulated traffic (same seed, same SOP
# Instance UIDs) is sent again, so rows are replaced, never duplicated.
# A port taken by another program is skipped for the next free one.
#
# Environment: DEMO_DAYS (default 28), DEMO_SEED (default 2026),
# DEMO_SPEED (0 = as fast as possible; N = N times real time).
set -euo pipefail
cd "$(dirname "$0")/.."
root=$PWD
days=${DEMO_DAYS:-28}
seed=${DEMO_SEED:-2026}
speed=${DEMO_SPEED:-0}

bash deploy/install-dependencies.sh
cmake -S . -B build -DCMAKE_BUILD_TYPE=RelWithDebInfo -DMITILOG_TESTS=OFF >/dev/null
cmake --build build -j"$(nproc)"

data=$root/demo-data
mkdir -p "$data"
if [ -f "$data/serve.pid" ]; then
    old=$(cat "$data/serve.pid")
    if kill -0 "$old" 2>/dev/null && grep -q mitilog "/proc/$old/cmdline" 2>/dev/null; then
        echo "demo: stopping the daemon of an earlier run (pid $old)"
        kill -TERM "$old"
        for _ in $(seq 1 100); do kill -0 "$old" 2>/dev/null || break; sleep 0.1; done
    fi
    rm -f "$data/serve.pid"
fi

port_in_use() { (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; }
free_port() {
    local port=$1
    while port_in_use "$port"; do port=$((port + 1)); done
    echo "$port"
}
dicom_port=$(free_port 11112)
http_port=$(free_port 8080)
[ "$http_port" = "$dicom_port" ] && http_port=$(free_port $((dicom_port + 1)))
[ "$dicom_port" = 11112 ] || echo "demo: port 11112 is taken; DICOM uses $dicom_port"
[ "$http_port" = 8080 ] || echo "demo: port 8080 is taken; HTTP uses $http_port"

cat > "$data/mitilog.ini" <<INI
; Written by deploy/demo.sh for the demo; conf/mitilog.ini documents every key.
[dicom]
ae_title = MITILOG
port = $dicom_port
[http]
address = 127.0.0.1
port = $http_port
web_root = $root/web
[storage]
data_directory = $data/var
retention = header
[log]
level = info
INI
build/mitilog check-config "$data/mitilog.ini" >/dev/null

build/mitilog serve --config "$data/mitilog.ini" 2>>"$data/serve.log" &
pid=$!
echo "$pid" > "$data/serve.pid"
stop() {
    trap - INT TERM EXIT
    if kill -0 "$pid" 2>/dev/null; then
        echo; echo "demo: stopping the daemon"
        kill -TERM "$pid"; wait "$pid" || true
    fi
    rm -f "$data/serve.pid"
}
trap stop INT TERM EXIT

export TCP_NODELAY=1
for _ in $(seq 1 100); do
    echoscu -aec MITILOG 127.0.0.1 "$dicom_port" 2>/dev/null && break
    kill -0 "$pid" 2>/dev/null || { echo "demo: the daemon did not start; see $data/serve.log"; exit 1; }
    sleep 0.1
done

# The administrator's part (docs/screen-reading.md, "Setting up a
# device"): a screen profile per scanner and software version, learned
# from a few of its images and activated, before its traffic arrives. The
# demo keeps retention = header, so an object is read once, when it
# arrives: objects received before their device's profile exists could
# not be read again later (docs/reading.md). The images to learn from are
# two days of the same simulated department (day 2 has US-ROOM-1's new
# software). US-ROOM-1's new software is left unlearned until the traffic
# has been sent, to show what a software update does to a profile.
learning=$data/learning-images
echo "demo: setting up the scanners' screen profiles from two simulated days of their images"
rm -rf "$learning"
build/mitilog simulate --days 2 --seed "$seed" --out "$learning" --screens --compress >/dev/null
python3 deploy/demo_devices.py learn --binary build/mitilog --config "$data/mitilog.ini" \
    --images "$learning" --skip ambervale-av40-4.1.0 --allow-refused
echo "demo: waiting 11 s for the daemon to pick up the active profiles (it looks every 10 s)"
sleep 11

echo "demo: sending $days days of simulated traffic (seed $seed) to 127.0.0.1:$dicom_port"
# --screens: the rooms' scanners burn the indices into the pixels (US-ROOM-4
# writes none into the header); --compress: most send JPEG baseline,
# JPEG-LS or RLE images (docs/demo.md, "Screens"). Uncompressed, four
# weeks of screens would be about 20 GB; compressed 3.7 GB.
build/mitilog simulate --days "$days" --seed "$seed" --out "$data/simulated" \
    --screens --compress \
    --send "127.0.0.1:$dicom_port" --called-aet MITILOG --speed "$speed"

echo "demo: waiting for the last screens to be read"
python3 deploy/demo_devices.py summary --database "$data/var/mitilog.sqlite3" --wait 900 \
    > "$data/reading-summary.txt" || true
# After the software update, US-ROOM-1's images were "not read: software
# changed" (the Devices page counts them against the old profile); the
# administrator now learns the new software, for the traffic to come.
python3 deploy/demo_devices.py learn --binary build/mitilog --config "$data/mitilog.ini" \
    --images "$learning" --only ambervale-av40-4.1.0 --allow-refused
rm -rf "$learning"

cat <<TEXT

mitilog is running.
  HTTP:   http://127.0.0.1:$http_port/          (health: /healthz)
  API:    http://127.0.0.1:$http_port/api/v1/studies?from=2026-11-01&to=2026-12-31
  DICOM:  AE MITILOG on port $dicom_port (echoscu -aec MITILOG 127.0.0.1 $dicom_port)
  Data:   $data/var (SQLite: $data/var/mitilog.sqlite3)
  Log:    $data/serve.log
  Devices: http://127.0.0.1:$http_port/devices.html   (screen profiles, frames refused)
  What to look for in the simulated data: docs/demo.md

Indices read from the screens (the values the scanners drew into the
pixels; US-ROOM-4 writes them nowhere else; US-ROOM-3's screen could not
be learned, US-ROOM-1's frames after its software update were not read
and the demo's retention = header cannot read them again):
$(cat "$data/reading-summary.txt")

mitilog advises; the department's safety policy, its physicist and local
regulation decide. Press Ctrl-C to stop.
TEXT
curl -s "http://127.0.0.1:$http_port/healthz" && echo
wait "$pid"
