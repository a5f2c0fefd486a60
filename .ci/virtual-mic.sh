#!/usr/bin/env bash
# A virtual microphone for the device tests: a private PulseAudio server
# (user mode, its own runtime and config folders) with a null sink "vmic"
# whose monitor is the capture source. PortAudio records it through ALSA's
# "pulse" device; `paplay -d vmic FILE` plays into it.
#
#   .ci/virtual-mic.sh start   start the server, print the PULSE_SERVER line
#   .ci/virtual-mic.sh stop    stop it (by the pids it recorded)
#   .ci/virtual-mic.sh env     print the PULSE_SERVER line
#   .ci/virtual-mic.sh unplug  remove the virtual device (as if unplugged)
#   .ci/virtual-mic.sh plug    bring it back
#
# Folder: $LIVEVOWEL_VMIC_DIR (default /tmp/livevowel-vmic). Clients need only
# PULSE_SERVER=unix:$DIR/native in their environment.
set -euo pipefail
DIR=${LIVEVOWEL_VMIC_DIR:-/tmp/livevowel-vmic}
RATE=${LIVEVOWEL_VMIC_RATE:-48000}
export PULSE_SERVER="unix:$DIR/native"
export XDG_RUNTIME_DIR="$DIR/run" XDG_CONFIG_HOME="$DIR/cfg"

alive() { [ -s "$1" ] && kill -0 "$(cat "$1")" 2>/dev/null; }

start() {
    if alive "$DIR/pulse.pid"; then
        echo "export PULSE_SERVER=$PULSE_SERVER"; return 0
    fi
    command -v pulseaudio >/dev/null || { echo "virtual-mic: pulseaudio is not installed (apt-get install pulseaudio pulseaudio-utils libasound2-plugins)" >&2; exit 1; }
    rm -rf "$DIR"; mkdir -p "$DIR/run" "$DIR/cfg"; chmod 700 "$DIR/run"
    pulseaudio -D -n --exit-idle-time=-1 --disallow-exit --log-target="file:$DIR/pulse.log" \
        --load="module-native-protocol-unix auth-anonymous=1 socket=$DIR/native" \
        --load="module-null-sink sink_name=vmic rate=$RATE channels=1"
    for _ in $(seq 200); do pactl info >/dev/null 2>&1 && break; sleep 0.05; done
    pactl info >/dev/null 2>&1 || { echo "virtual-mic: server did not start; see $DIR/pulse.log" >&2; exit 1; }
    cp "$DIR/run/pulse/pid" "$DIR/pulse.pid"
    pactl set-default-sink vmic
    pactl set-default-source vmic.monitor
    keepalive
    sleep 1
    echo "export PULSE_SERVER=$PULSE_SERVER"
}

# Keep the idle sink clocked, or the first capture block arrives 1-2 s late.
keepalive() {
    if alive "$DIR/keepalive.pid"; then kill "$(cat "$DIR/keepalive.pid")" 2>/dev/null || true; fi
    nohup pacat -p -d vmic --latency-msec=20 /dev/zero </dev/null >/dev/null 2>&1 &
    echo $! > "$DIR/keepalive.pid"
}

unplug() {
    local id
    id=$(pactl list short modules | awk '/module-null-sink/ && /sink_name=vmic/ {print $1; exit}')
    [ -n "$id" ] && pactl unload-module "$id"
    if alive "$DIR/keepalive.pid"; then kill "$(cat "$DIR/keepalive.pid")" 2>/dev/null || true; fi
    rm -f "$DIR/keepalive.pid"
}

plug() {
    pactl list short sinks | grep -q '^[0-9]*[[:space:]]vmic[[:space:]]' || \
        pactl load-module module-null-sink sink_name=vmic rate="$RATE" channels=1 >/dev/null
    pactl set-default-sink vmic
    pactl set-default-source vmic.monitor
    keepalive
}

stop() {
    for f in keepalive.pid pulse.pid; do
        if alive "$DIR/$f"; then kill "$(cat "$DIR/$f")" 2>/dev/null || true; fi
        rm -f "$DIR/$f"
    done
}

case "${1:-}" in
    start) start ;;
    stop) stop ;;
    env) echo "export PULSE_SERVER=$PULSE_SERVER" ;;
    unplug) unplug ;;
    plug) plug ;;
    *) echo "usage: $0 start|stop|env|unplug|plug" >&2; exit 2 ;;
esac
