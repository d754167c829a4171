#!/usr/bin/env bash
# Makes the shared bad recordings of testdata/wav: `testdata/wav/gen.sh [DIR]` writes them to
# DIR (default: this directory). Every file comes from sox (Debian package sox, SoX v14.4.2 in
# Debian 12) or from a sox file cut or patched with coreutils, so they do not depend on
# leqnode's own WAV writer; node/lib/wav's TestSharedRecordingsReproducible runs this script and
# compares its output with the committed files byte for byte.
set -euo pipefail
out=${1:-$(dirname "$0")}
mkdir -p "$out"
cd "$out"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

# Every sox command runs repeatable (-R) and without dither (-D): the same file at every run.
# Bases (not kept): a 1 kHz sine of peak 0.1 (-20 dBFS), 1.5 s at 8 kHz, as 32-bit float
# (58-byte header: fmt of 18 bytes, a fact chunk, then data) and as 16-bit PCM (44-byte header).
sox -R -D -n -r 8000 -c 1 -b 32 -e floating-point "$tmp/float.wav" synth 1.5 sine 1000 vol 0.1
sox -R -D -n -r 8000 -c 1 -b 16 -e signed-integer "$tmp/pcm16.wav" synth 1.5 sine 1000 vol 0.1

: > empty.wav                                                   # no bytes at all
printf 'hello, this is not audio at all' > not-a-wav.wav         # text named .wav
head -c 30 "$tmp/pcm16.wav" > truncated-header.wav               # ends inside the fmt chunk
head -c 44 "$tmp/pcm16.wav" > header-only.wav                    # declares 12000 samples, holds none
head -c -1000 "$tmp/pcm16.wav" > short-data.wav                  # data ends 500 samples before its declared size

# A NaN and an infinite sample 1000 samples before the end (after the first second), so a
# reader fails late, after it has measured a whole interval. Little-endian IEEE 754 single:
# quiet NaN 0x7FC00000, +Inf 0x7F800000.
size=$(stat -c %s "$tmp/float.wav")
cp "$tmp/float.wav" nan-sample.wav
printf '\x00\x00\xc0\x7f' | dd of=nan-sample.wav bs=1 seek=$((size - 4000)) conv=notrunc status=none
cp "$tmp/float.wav" inf-sample.wav
printf '\x00\x00\x80\x7f' | dd of=inf-sample.wav bs=1 seek=$((size - 4000)) conv=notrunc status=none

# Encodings leqnode does not take, written by sox: 0.1 s at 8 kHz.
sox -R -D -n -r 8000 -c 1 -b 8 -e unsigned-integer eight-bit.wav synth 0.1 sine 1000 vol 0.1
sox -R -D -n -r 8000 -c 1 -e mu-law mu-law.wav synth 0.1 sine 1000 vol 0.1
sox -R -D -n -r 8000 -c 1 -e a-law a-law.wav synth 0.1 sine 1000 vol 0.1
