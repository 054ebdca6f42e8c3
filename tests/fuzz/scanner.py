"""Feed the compiled body scanner many mutated bodies: `python -m tests.fuzz.scanner [N]`.

Meant to run against a build with AddressSanitizer and UBSan (`make sanitize`), where
any read past a buffer or undefined behaviour aborts the run. Whatever the scanner
accepts must also be JSON to orjson and decode to the same members.
"""

from __future__ import annotations

import random
import sys

import orjson

from service.model import fastarcs
from service.model.fastarcs import decode_arcs_body
from tests.test_fastarcs import DUMPERS, NAME_STYLES, NASTY, SEED_BODIES, columnar, random_body


def seed_bodies(rng: random.Random) -> list[bytes]:
    bodies = list(SEED_BODIES)
    for s in range(30):
        for names in [None, *NAME_STYLES.values()]:
            body = random_body(s, names)
            bodies.append(rng.choice(list(DUMPERS.values()))(rng.choice([body, columnar(body)])))
    return bodies


def mutate(raw: bytes, rng: random.Random) -> bytes:
    out = bytearray(raw)
    for _ in range(rng.randint(1, 4)):
        at = rng.randrange(len(out))
        piece = rng.choice(NASTY) if rng.random() < 0.8 else bytes([rng.randrange(256)])
        what = rng.random()
        if what < 0.4:
            out[at:at + len(piece)] = piece
        elif what < 0.8:
            out[at:at] = piece
        else:
            del out[at:at + rng.randint(1, 8)]
    if rng.random() < 0.3:  # and cut short anywhere
        del out[rng.randrange(len(out)):]
    return bytes(out)


def main(count: int = 100_000, seed: int = 1) -> None:
    if not fastarcs.available():
        sys.exit("the compiled scanner is not installed")
    rng = random.Random(seed)
    bodies = seed_bodies(rng)
    accepted = 0
    for _ in range(count):
        raw = mutate(rng.choice(bodies), rng)
        fast = decode_arcs_body(raw, min_bytes=0)
        if fast is None:
            continue
        accepted += 1
        slow = orjson.loads(raw)  # raises if the scanner took a body that is not JSON
        assert {k: v for k, v in fast.items() if k != "arcs"} == {k: v for k, v in slow.items() if k != "arcs"}
    print(f"{count} mutated bodies, {accepted} accepted (all JSON to orjson); scanner {fastarcs._arcscan.__file__}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 100_000)
