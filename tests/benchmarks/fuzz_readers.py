"""Fuzz the drawing and mesh readers with seeded mutations of the demo files.

Each mutant (byte flips, truncation, deleted and duplicated group-code pairs, damaged
entity names) is read in a child process with a time limit.  A mutant passes when the
reader returns a model or raises a SpaceframeError with a one-line message; anything else
(another exception, a hang, a crash, a multi-line message) is a failure.

    PYTHONPATH=$PWD python tests/benchmarks/fuzz_readers.py --cases 2000 --seed 1

The short run in the normal suite (tests/test_fuzz.py) uses the same functions.
"""

from __future__ import annotations

import argparse
import multiprocessing as mp
import random
import sys
import tempfile
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
DXF_DEMO = ROOT / "examples" / "canopy" / "canopy.dxf"
MSH_DEMO = ROOT / "examples" / "mast" / "mast.msh"
TIMEOUT = 20.0  # seconds per case (a demo-size file reads in well under one)
MESSAGE_CAP = 1000


def _pairs(text: str) -> list[str]:
    lines = text.split("\n")
    return ["\n".join(lines[i:i + 2]) for i in range(0, len(lines) - 1, 2)]


def mutate(data: bytes, suffix: str, rng: random.Random) -> bytes:
    """One seeded mutation of a demo file."""
    kind = rng.choice(["flip", "truncate", "delete_pair", "dup_pair", "entity_name",
                       "delete_line", "number"])
    if kind == "flip":
        b = bytearray(data)
        for _ in range(rng.randint(1, 8)):
            i = rng.randrange(len(b))
            b[i] ^= 1 << rng.randrange(8)
        return bytes(b)
    if kind == "truncate":
        return data[: rng.randrange(len(data))]
    text = data.decode("utf-8", "surrogateescape")
    if suffix == "dxf" and kind in ("delete_pair", "dup_pair"):
        pairs = _pairs(text)
        i = rng.randrange(len(pairs))
        if kind == "delete_pair":
            del pairs[i]
        else:
            pairs.insert(i, pairs[i])
        return ("\n".join(pairs) + "\n").encode("utf-8", "surrogateescape")
    lines = text.split("\n")
    if kind == "entity_name":
        names = [i for i, s in enumerate(lines) if s.strip() in
                 ("LINE", "POLYLINE", "VERTEX", "INSERT", "$Nodes", "$Elements",
                  "$PhysicalNames", "$EndNodes", "$EndElements", "LAYER")]
        if names:
            i = rng.choice(names)
            s = list(lines[i])
            j = rng.randrange(len(s))
            s[j] = rng.choice("XQ_0 ")
            lines[i] = "".join(s)
    elif kind == "delete_line":
        del lines[rng.randrange(len(lines))]
    else:  # replace a number with an extreme or malformed one
        nums = [i for i, s in enumerate(lines) if s.strip().lstrip("-").replace(".", "", 1)
                .replace("e", "", 1).replace("+", "").isdigit()]
        if nums:
            i = rng.choice(nums)
            lines[i] = rng.choice(["nan", "inf", "-1e308", "4e307", "1e-320", "x", "", "-0"])
    return "\n".join(lines).encode("utf-8", "surrogateescape")


def _read_one(path: str, queue: mp.Queue) -> None:  # type: ignore[type-arg]
    import spaceframe as sf
    from spaceframe.errors import SpaceframeError

    warnings.simplefilter("ignore")
    try:
        sf.io.read(path, units="mm")
    except SpaceframeError as exc:
        msg = str(exc)
        bad = "\n" in msg or "\r" in msg or len(msg) > MESSAGE_CAP
        queue.put(("multi-line or long message: " + msg[:200]) if bad else "ok")
    except BaseException as exc:  # any other exception is what the fuzz run looks for
        queue.put(f"{type(exc).__name__}: {str(exc)[:200]}")
    else:
        queue.put("ok")


def check(data: bytes, suffix: str, workdir: Path, timeout: float = TIMEOUT) -> str:
    """Read one mutant in a child process: "ok" or a description of the failure."""
    path = workdir / f"mutant.{suffix}"
    path.write_bytes(data)
    ctx = mp.get_context("fork")
    queue = ctx.Queue()
    proc = ctx.Process(target=_read_one, args=(str(path), queue))
    proc.start()
    proc.join(timeout)
    if proc.is_alive():
        proc.kill()
        proc.join()
        return f"hang (> {timeout:g} s)"
    if queue.empty():
        return f"child died (exit code {proc.exitcode})"
    return str(queue.get())


def mutants(n: int, seed: int) -> list[tuple[str, int, bytes]]:
    """n seeded mutants, alternating the demo drawing and the demo mesh."""
    sources = [("dxf", DXF_DEMO.read_bytes()), ("msh", MSH_DEMO.read_bytes())]
    out = []
    for k in range(n):
        suffix, data = sources[k % 2]
        rng = random.Random(seed * 1_000_003 + k)
        out.append((suffix, k, mutate(data, suffix, rng)))
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", type=int, default=2000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--timeout", type=float, default=TIMEOUT)
    args = ap.parse_args(argv)
    failures = 0
    with tempfile.TemporaryDirectory() as tmp:
        for suffix, k, data in mutants(args.cases, args.seed):
            verdict = check(data, suffix, Path(tmp), args.timeout)
            if verdict != "ok":
                failures += 1
                print(f"case {k} ({suffix}, seed {args.seed}): {verdict}")
    print(f"{args.cases} mutants, {failures} failures")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    sys.exit(main())
