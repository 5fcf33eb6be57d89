#!/usr/bin/env python3
"""An example rule program for qkd-audit (protocol: docs/rule-programs.md).

It computes the `finite-uncertainty` key length, written out in plain Python with the same
operations in the same order as the tool's built-in rule, so an audit of this program gives
the built-in rule's key lengths exactly. Replace `key_length` with your own code.

Run by the tool as, e.g., command = ["python3", "keylen.py"] in a rule file next to it.
`keylen.py --version` prints the program's version for the manifest.
"""
import json
import math
import sys

VERSION = "keylen.py 1.0 (example)"
PROTOCOL = 1


def xlog(x):
    return 0.0 if x <= 0.0 else -x * math.log2(x)


def h(x):
    """Binary entropy, charged 1 bit at or above 1/2 and for a missing rate (null)."""
    if x is None or x >= 0.5:
        return 1.0
    x = max(x, 0.0)
    return xlog(x) + xlog(1.0 - x)


def serfling(n, k, eps):
    if n == 0 or k == 0:
        return math.inf
    n, k = float(n), float(k)
    return math.sqrt((n + k) / (n * k) * (k + 1.0) / k * math.log(1.0 / eps))


def key_length(b):
    n, k = b["n"], b["k"]
    eps_sec, eps_cor = b["eps_sec"], b["eps_cor"]
    q_ec = b["q_ec"]
    mu = serfling(n, k, eps_sec / 4.0)
    leak = b["f"] * float(n) * h(q_ec) + math.log2(2.0 / eps_cor)
    pa = 2.0 * math.log2(1.0 / (2.0 * (eps_sec / 2.0)))
    raw = float(n) * (1.0 - h(b["abort_qber"] + mu)) - leak - pa
    return math.floor(raw) if math.isfinite(raw) and raw >= 1.0 else 0


def main():
    if "--version" in sys.argv[1:]:
        print(VERSION)
        return
    for line in sys.stdin:
        request = json.loads(line)
        if request.get("version") != PROTOCOL:
            print(json.dumps({"error": {"message": "unsupported protocol version %r" % request.get("version")}}), flush=True)
            return
        out = []
        for b in request["blocks"]:
            out.append(json.dumps({"point": b["point"], "trial": b["trial"], "key_bits": key_length(b)}))
        sys.stdout.write("\n".join(out) + "\n")
        sys.stdout.flush()


if __name__ == "__main__":
    main()
