#!/usr/bin/env python3
"""Makes malformed inputs of every kind tapgrid reads and prints, as a Markdown table, the exit
code and message each gives. README's table of malformed inputs is this script's output:

    cargo build --release && python3 scripts/malformed_inputs.py

Every case must exit with code 2 (or 0 where the input is usable and the problem is reported
in the summary) and a message naming the file or option; never 101 (a panic) or a signal.
"""
import json
import math
import os
import pathlib
import shutil
import struct
import subprocess
import sys
import tempfile

ROOT = pathlib.Path(__file__).resolve().parent.parent
BIN = ROOT / "target" / "release" / "tapgrid"


def wav(path, channels=2, bits=16, fs=8000, frames=24000, fmt=1, data=None, hits=(0.5, 1.8)):
    """A WAV file with two decaying taps (channel 0 force, channel 1 response)."""
    if data is None:
        samples = []
        for i in range(frames):
            t = i / (fs or 8000)
            f = 0.0
            r = 0.0
            for t0 in hits:
                if 0 <= t - t0 < 0.001:
                    f = 0.5 * math.sin(math.pi * (t - t0) / 0.001)
                if t >= t0:
                    r += 0.3 * math.exp(-20 * (t - t0)) * math.sin(2 * math.pi * 300 * (t - t0))
            row = [f, r] + [0.0] * (channels - 2)
            samples.append(row[:channels])
        width = bits // 8
        out = bytearray()
        for row in samples:
            for v in row:
                if fmt == 3:
                    out += struct.pack("<f", v)
                elif bits == 8:
                    out += struct.pack("<B", int(128 + 127 * v))
                else:
                    q = int(v * (2 ** (bits - 1) - 1))
                    out += q.to_bytes(width, "little", signed=True)
        data = bytes(out)
    block = channels * bits // 8
    header = b"RIFF" + struct.pack("<I", 36 + len(data)) + b"WAVE"
    header += b"fmt " + struct.pack("<IHHIIHH", 16, fmt, channels, fs, fs * block, block, bits)
    header += b"data" + struct.pack("<I", len(data))
    path.write_bytes(header + data)


def run(args):
    p = subprocess.run([str(BIN), *map(str, args)], capture_output=True, text=True, timeout=120)
    if p.returncode != 0:
        lines = p.stderr.strip().splitlines()
        return p.returncode, lines[0] if lines else ""
    # A usable input: the summary line that reports the problem (a rejected hit and its reason).
    lines = p.stdout.strip().splitlines()
    flagged = [l.strip() for l in lines if "corrupt" in l or "rejected" in l]
    return p.returncode, (flagged or lines or [""])[0]


def main():
    tmp = pathlib.Path(tempfile.mkdtemp(prefix="tapgrid-malformed-"))
    rows = []

    def case(kind, what, args, shorten=None):
        code, msg = run(args)
        msg = msg.replace(str(tmp) + "/", "")
        rows.append((kind, what, code, msg))

    def wavset(name, files):
        d = tmp / name
        d.mkdir()
        for fname, kw in files.items():
            if isinstance(kw, bytes):
                (d / fname).write_bytes(kw)
            else:
                wav(d / fname, **kw)
        return d

    out = tmp / "out"
    # WAV recordings
    case("WAV", "empty folder", ["analyze", wavset("empty", {}), "--out", out])
    case("WAV", "text file named .wav", ["analyze", wavset("text", {"st1.wav": b"hello, not audio\n"}), "--out", out])
    case("WAV", "zero-length file", ["analyze", wavset("zero", {"st1.wav": b""}), "--out", out])
    d = wavset("trunc", {"st1.wav": {}})
    (d / "st1.wav").write_bytes((d / "st1.wav").read_bytes()[:20000])
    case("WAV", "data cut short (header says more)", ["analyze", d, "--out", out])
    case("WAV", "mono file", ["analyze", wavset("mono", {"st1.wav": {"channels": 1}}), "--out", out])
    case("WAV", "8-bit samples", ["analyze", wavset("eight", {"st1.wav": {"bits": 8}}), "--out", out])
    case("WAV", "channel index beyond the file", ["analyze", wavset("chan", {"st1.wav": {}}), "--out", out, "--channels", "0,5"])
    case("WAV", "two files for one station", ["analyze", wavset("twice", {"st1.wav": {}, "station-01.wav": {}}), "--out", out])
    case("WAV", "file name without a station number", ["analyze", wavset("noname", {"hammer.wav": {}}), "--out", out])
    case("WAV", "sample rates differ between files", ["analyze", wavset("rates", {"st1.wav": {}, "st2.wav": {"fs": 16000, "frames": 48000}}), "--out", out])
    case("WAV", "no tap in the recording", ["analyze", wavset("nohit", {"st1.wav": {"hits": ()}}), "--out", out])
    case("WAV", "sample rate 0 in the header", ["analyze", wavset("fs0", {"st1.wav": {"fs": 0}}), "--out", out])
    case("WAV", "band above the Nyquist frequency", ["analyze", wavset("nyq", {"st1.wav": {}}), "--out", out, "--band", "10:6000"])
    nan = bytearray()
    for i in range(24000):
        f = 0.0
        for i0 in (4000, 14400):
            if i0 <= i < i0 + 8:
                f = 0.5 * math.sin(math.pi * (i - i0 + 0.5) / 8)
        r = float("nan") if 15000 <= i < 15010 else 0.1 * math.sin(i / 7.0) * (1 if i > 4000 else 0)
        nan += struct.pack("<ff", f, r)
    case("WAV", "NaN samples in a float file", ["analyze", wavset("nan", {"st1.wav": {"fmt": 3, "bits": 32, "data": bytes(nan)}}), "--out", out])

    # stations.csv
    def with_csv(name, text):
        d = wavset(name, {"st1.wav": {}, "st2.wav": {}})
        (d / "stations.csv").write_text(text)
        return d

    case("stations.csv", "empty file", ["analyze", with_csv("csv0", ""), "--out", out])
    case("stations.csv", "header without position_m", ["analyze", with_csv("csv1", "station,x\n1,0\n2,0.1\n"), "--out", out])
    case("stations.csv", "station not a whole number", ["analyze", with_csv("csv2", "station,position_m\none,0\n2,0.1\n"), "--out", out])
    case("stations.csv", "position not a number", ["analyze", with_csv("csv3", "station,position_m\n1,zero\n2,0.1\n"), "--out", out])
    case("stations.csv", "position NaN", ["analyze", with_csv("csv4", "station,position_m\n1,NaN\n2,0.1\n"), "--out", out])
    case("stations.csv", "a station's row missing", ["analyze", with_csv("csv5", "station,position_m\n1,0\n"), "--out", out])
    case("stations.csv", "one station listed twice", ["analyze", with_csv("csv6", "station,position_m\n1,0\n1,0.2\n2,0.1\n"), "--out", out])

    # session.json
    good = tmp / "wavs"
    subprocess.run([str(BIN), "simulate", "--stations", "4", "--hits", "2", "--out", good], check=True, capture_output=True)

    def session(name, edit=None, raw_edit=None):
        s = tmp / name
        subprocess.run([str(BIN), "import", good, "--session", s], check=True, capture_output=True)
        p = s / "session.json"
        if edit:
            v = json.loads(p.read_text())
            edit(v)
            p.write_text(json.dumps(v))
        if raw_edit:
            raw_edit(s)
        return s

    def text_session(name, text):
        s = tmp / name
        s.mkdir()
        (s / "session.json").write_text(text)
        return s

    case("session.json", "not JSON", ["analyze", text_session("m0", "{"), "--out", out])
    case("session.json", "another program's JSON", ["analyze", text_session("m1", '{"format":"other"}'), "--out", out])
    case("session.json", "from a newer tapgrid", ["analyze", text_session("m2", '{"format":"tapgrid-session","schema_version":99}'), "--out", out])
    case("session.json", "a raw recording missing", ["analyze", session("m3", raw_edit=lambda s: (s / "raw" / sorted(os.listdir(s / "raw"))[0]).unlink()), "--out", out])
    case("session.json", "a raw recording changed", ["analyze", session("m4", raw_edit=lambda s: open(s / "raw" / sorted(os.listdir(s / "raw"))[0], "ab").write(b"xx")), "--out", out])

    def setv(path, value):
        def f(v):
            o = v
            for k in path[:-1]:
                o = o[k]
            o[path[-1]] = value
        return f

    case("session.json", "record length 1e12 s", ["analyze", session("m5", setv(["setup", "trigger", "record_length_s"], 1e12)), "--out", out])
    case("session.json", "negative sensitivity", ["analyze", session("m6", setv(["setup", "channel_b", "sensitivity", "mv_per_unit"], -3.0)), "--out", out])
    case("session.json", "full-scale volts 1e300", ["analyze", session("m7", setv(["setup", "full_scale_volts"], 1e300)), "--out", out])
    case("session.json", "4e12 frames in a small file", ["analyze", session("m8", setv(["recordings", 0, "frames"], 4_000_000_000_000)), "--out", out])
    case("session.json", "station position 1e300 m", ["analyze", session("m9", setv(["stations", 1, "position_m"], 1e300)), "--out", out])
    case("session.json", "hit index 9e9", ["analyze", session("m10", setv(["hits", 0, "index"], 9_000_000_000)), "--out", out])
    case("session.json", "raw file outside the folder", ["analyze", session("m11", setv(["recordings", 0, "file"], "../../etc/passwd")), "--out", out])
    case("session.json", "sample rate 0", ["analyze", session("m12", setv(["recordings", 0, "sample_rate_hz"], 0)), "--out", out])

    # shaft JSON
    def shaft(name, value):
        p = tmp / f"{name}.json"
        p.write_text(value if isinstance(value, str) else json.dumps(value))
        return p

    steel = {"youngs_modulus_pa": 2.0e11, "density_kg_m3": 7850.0, "poisson_ratio": 0.3}
    sec = {"length_m": 0.9, "outer_diameter_m": 0.05}
    case("shaft JSON", "not JSON", ["model", shaft("s0", "{sections"), "--out", out])
    case("shaft JSON", "no sections", ["model", shaft("s1", {"material": steel, "sections": []}), "--out", out])
    case("shaft JSON", "a section 150 km long", ["model", shaft("s2", {"material": steel, "sections": [sec, {"length_m": 150000.0, "outer_diameter_m": 0.05}]}), "--out", out])
    case("shaft JSON", "density of air", ["model", shaft("s3", {"material": dict(steel, density_kg_m3=1.2), "sections": [sec]}), "--out", out])
    case("shaft JSON", "bore larger than the section", ["model", shaft("s4", {"material": steel, "sections": [dict(sec, inner_diameter_m=0.06)]}), "--out", out])
    case("shaft JSON", "support beyond the end", ["model", shaft("s5", {"material": steel, "sections": [sec], "supports": [{"position_m": 2.0, "stiffness_n_per_m": 1e7}]}), "--out", out])
    case("shaft JSON", "1 mm thick, 10 m long", ["model", shaft("s6", {"material": steel, "sections": [{"length_m": 10.0, "outer_diameter_m": 0.001}]}), "--out", out])

    # output folder and command-line values
    blocker = tmp / "blocker"
    blocker.write_text("a file")
    case("output folder", "output path below a file", ["analyze", good, "--out", blocker / "sub"])
    case("options", "--record-length 1e30", ["analyze", good, "--out", out, "--record-length", "1e30"])
    case("options", "--holdoff 1e300", ["analyze", good, "--out", out, "--holdoff", "1e300"])
    case("options", "simulate --fs 0", ["simulate", "--fs", "0", "--out", tmp / "z"])
    case("options", "force sensitivity in mV/g", ["analyze", good, "--out", out, "--sensitivity", "2.25mV/g,10"])
    case("options", "band low above high", ["analyze", good, "--out", out, "--band", "500:100"])

    print("| input | malformed how | exit | message |")
    print("|---|---|---|---|")
    for kind, what, code, msg in rows:
        msg = msg.replace("|", "\\|")
        print(f"| {kind} | {what} | {code} | {msg} |")
    bad = [r for r in rows if r[2] not in (0, 2)]
    shutil.rmtree(tmp, ignore_errors=True)
    if bad:
        print(f"\n{len(bad)} case(s) exited with neither 0 nor 2", file=sys.stderr)
        sys.exit(1)


if __name__ == "__main__":
    main()
