#!/usr/bin/env python3
"""Writes the hand-made seed inputs of the fuzz targets into corpus/<target>/.

The scenarios are invented for the seeds (a few RC and constant-phase arcs,
a precision resistor, an inductive cable, a pulse on a small cell); the
fuzzer grows the corpus from them. Run from the fuzz/ folder:
    python3 make_seeds.py
"""

import cmath
import math
import os
import struct

HERE = os.path.dirname(os.path.abspath(__file__))


def write(target, name, data):
    path = os.path.join(HERE, "corpus", target, "seed-" + name)
    if isinstance(data, str):
        data = data.encode("utf-8")
    with open(path, "wb") as f:
        f.write(data)


def arc(f_hz, r_ohm, tau_s, alpha=1.0):
    """A resistor in parallel with a constant-phase element, the ZARC
    R / (1 + (j w tau)^alpha) (common practice; alpha = 1: an RC element)."""
    return r_ohm / (1 + (2j * math.pi * f_hz * tau_s) ** alpha)


def cell(f_hz):
    """A small invented cell: series resistance, inductance and two arcs."""
    w = 2 * math.pi * f_hz
    return 0.05 + 1j * w * 2e-8 + arc(f_hz, 0.12, 3e-4, 0.9) + arc(f_hz, 0.3, 0.2, 0.8)


def log_freqs(lo, hi, n, descending=True):
    fs = [10 ** (lo + (hi - lo) * k / (n - 1)) for k in range(n)]
    return fs[::-1] if descending else fs


def spectrum_seeds():
    t = "spectrum_reader"
    fs = log_freqs(-1, 5, 25)
    zs = [cell(f) for f in fs]
    write(t, "canonical", "frequency_hz,z_re_ohm,z_im_ohm\n" + "".join(
        f"{f:.6e},{z.real:.6e},{z.imag:.6e}\n" for f, z in zip(fs, zs)))
    write(t, "semicolon-bom-crlf-comments", b"\xef\xbb\xbf# bench 3, cell B\r\n" + (
        "Freq (Hz);Z' (Ohm);Z'' (Ohm);T (C)\r\n" + "".join(
            f" {f:g} ; {z.real:.5f} ; {z.imag:.5f} ; 25\r\n" for f, z in zip(fs[:8], zs))
    ).encode())
    write(t, "tab-negated-extra-columns", "idx\tfreq/Hz\t-Z''/Ohm\tZ'/Ohm\ttime/s\n" + "".join(
        f"{k}\t{f:g}\t{-z.imag:g}\t{z.real:g}\t{k * 3}\n" for k, (f, z) in enumerate(zip(fs, zs))))
    write(t, "polar", "frequency_hz,z_mod_ohm,z_phase_deg\n" + "".join(
        f"{f:g},{abs(z):g},{math.degrees(cmath.phase(z)):g}\n" for f, z in zip(fs[:10], zs)))
    write(t, "quoted-space", '"f [Hz]" "Re [Ohm]" "Im [Ohm]"\n' + "".join(
        f"{f:g} {z.real:g} {z.imag:g}\n" for f, z in zip(fs[:6], zs)))
    write(t, "resistor-exact", "f,re,im\n" + "".join(f"{f:g},1,0\n" for f in fs[:12]))
    write(t, "decimal-comma-kilo", "f/kHz;Z'/kOhm;Z''/kOhm\n" + "".join(
        f"{f / 1e3:g};{z.real / 1e3:g};{z.imag / 1e3:g}\n".replace(".", ",")
        for f, z in zip(fs[:7], zs)))
    write(t, "metadata-block", "Instrument export\nOperator: B. Lund\n\n" +
          "frequency_hz,z_re_ohm,z_im_ohm,\n" + "".join(
              f"{f:g},{z.real:g},{z.imag:g},\n" for f, z in zip(fs[:6], zs)))
    write(t, "utf16", "\ufefff,re,im\n1,2,-1\n2,2,-1\n3,2,-1\n4,2,-1\n5,2,-1\n".encode("utf-16-le"))
    write(t, "latin1-ohm", "f (Hz),Z' (\xb0),Z'' (\u2126)\n1,2,3\n".encode("latin-1", "replace"))
    write(t, "duplicate-frequency", "f,re,im\n1,1,-1\n2,1,-1\n2,1,-1\n3,1,-1\n4,1,-1\n")
    write(t, "bad-number", "f,re,im\n1,1,-1\n2,1.2e,-1\n")
    write(t, "header-only", "frequency_hz,z_re_ohm,z_im_ohm\n")
    write(t, "long-field", "f,re,im\n" + "9" * 3000 + ",1,1\n")


def transient_seeds():
    t = "transient_reader"
    tau1, tau2 = 2e-3, 0.4
    pre = "".join(f"{-k * 1e-3:.4e},{1.05:.6f}\n" for k in range(5, 0, -1))
    times = [10 ** (-4 + 5 * k / 59) for k in range(60)]
    volts = [1.05 - 0.1 * (0.05 + 0.1 * (1 - math.exp(-x / tau1)) + 0.2 * (1 - math.exp(-x / tau2)))
             for x in times]
    write(t, "voltage-log-times", "# pulse, -0.1 A at t = 0\ntime_s,voltage_v\n" + pre +
          "0,1.05\n" + "".join(f"{x:.5e},{v:.6f}\n" for x, v in zip(times, volts)))
    write(t, "ms-mv-semicolon", "Time (ms);U (mV);T_cell\n-2;1050;25\n-1;1050;25\n0;1050;25\n" +
          "".join(f"{x * 1e3:g};{v * 1e3:.3f};25\n" for x, v in zip(times, volts)))
    write(t, "current-linear", "t,i_a\n" + "".join(
        f"{k * 1e-3:g},{0.2 * math.exp(-k * 1e-3 / 0.05):.6e}\n" for k in range(1, 400, 7)))
    write(t, "current-us-ua", "time (us)\tcurrent (uA)\n" + "".join(
        f"{x * 1e6:g}\t{30 * math.exp(-x / tau1):g}\n" for x in times))
    write(t, "logger-clock", "time,voltage\n" + "".join(
        f"{1000 + k * 0.01:.2f},{1.0 + k * 1e-4:.5f}\n" for k in range(100)))
    write(t, "not-increasing", "time_s,voltage_v\n1e-3,1\n2e-3,1\n2e-3,1\n")
    write(t, "both-quantities", "time_s,voltage_v,current_a\n1,1,1\n")
    write(t, "wrong-unit", "time (h),voltage (kV)\n1,1\n")


class Enc:
    """The byte layout of fuzz_targets/invert_spectrum.rs."""

    def __init__(self, n, all_curves=False):
        assert 5 <= n <= 40
        self.b = bytearray([(n - 5) | (0x80 if all_curves else 0)])

    def f_raw(self, f):
        self.b += bytes([0]) + struct.pack("<d", f)

    def f_log(self, f):
        u = round((math.log10(f) + 5) / 14 * 65535)
        self.b += bytes([1]) + struct.pack("<H", max(0, min(65535, u)))

    def v_raw(self, v):
        self.b += bytes([0]) + struct.pack("<d", v)

    def v_int(self, v):
        self.b += bytes([2]) + struct.pack("<b", v)

    def v_f32(self, v):
        self.b += bytes([3]) + struct.pack("<f", v)


def invert_seeds():
    t = "invert_spectrum"
    fs = log_freqs(-1, 5, 40)
    e = Enc(40)
    for f in fs:
        z = cell(f)
        e.f_raw(f), e.v_raw(z.real), e.v_raw(z.imag)
    write(t, "cell-40", bytes(e.b))

    e = Enc(20, all_curves=True)
    for f in log_freqs(-2, 4, 20):
        z = arc(f, 2.0, 1e-2) + 0.5
        e.f_log(f), e.v_f32(z.real), e.v_f32(z.imag)
    write(t, "rc-20-all-curves", bytes(e.b))

    e = Enc(12)
    for f in log_freqs(0, 5, 12):
        e.f_log(f), e.v_int(1), e.v_int(0)
    write(t, "resistor-exact", bytes(e.b))

    e = Enc(15)
    for f in log_freqs(2, 7, 15):
        w = 2 * math.pi * f
        e.f_raw(f), e.v_raw(0.2), e.v_raw(w * 1e-6)
    write(t, "inductive", bytes(e.b))

    e = Enc(10)
    for f in log_freqs(-1, 3, 10):
        z = arc(f, 1.0, 1e-2)
        e.f_raw(f), e.v_raw(-0.3 + z.real), e.v_raw(z.imag)
    write(t, "negative-real", bytes(e.b))

    for name, scale in [("tiny", 1e-190), ("huge", 1e190)]:
        e = Enc(8)
        for f in log_freqs(0, 4, 8):
            z = arc(f, 1.0, 1e-3) * scale
            e.f_raw(f), e.v_raw(z.real), e.v_raw(z.imag)
        write(t, "magnitude-" + name, bytes(e.b))

    e = Enc(6)
    for k, f in enumerate([1.0, math.nextafter(1.0, 2.0), 2.0, 3.0, 1e3, 1e4]):
        e.f_raw(f), e.v_raw(1.0 + k), e.v_raw(-1.0)
    write(t, "adjacent-frequencies", bytes(e.b))


if __name__ == "__main__":
    for target in ("spectrum_reader", "transient_reader", "invert_spectrum"):
        os.makedirs(os.path.join(HERE, "corpus", target), exist_ok=True)
    spectrum_seeds()
    transient_seeds()
    invert_seeds()
