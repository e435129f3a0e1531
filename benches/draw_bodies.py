#!/usr/bin/env python3
"""Request bodies for benches/http_load.sh: real goal states drawn from `quarry harvest`'s records.

    python3 benches/draw_bodies.py STATES.jsonl OUT.jsonl [COUNT] [SEED]

Draws COUNT (default 500) records with Python's `random.Random(SEED)` (default 7) among those
whose goal is under 4,000 characters, and writes one `{"goal": ...}` request body per line.
"""
import json
import random
import sys


def main() -> int:
    if len(sys.argv) < 3:
        print(__doc__, file=sys.stderr)
        return 2
    states, out = sys.argv[1], sys.argv[2]
    try:
        count = int(sys.argv[3]) if len(sys.argv) > 3 else 500
        seed = int(sys.argv[4]) if len(sys.argv) > 4 else 7
    except ValueError as e:
        print(f"COUNT and SEED must be whole numbers: {e}", file=sys.stderr)
        return 2
    if count < 1:
        print(f"COUNT must be at least 1, not {count}", file=sys.stderr)
        return 2
    goals = []
    try:
        f = open(states, encoding="utf-8")
    except OSError as e:
        print(f"{states}: cannot read the harvest records ({e.strerror})", file=sys.stderr)
        return 1
    with f:
        for number, line in enumerate(f, 1):
            if not line.strip():
                continue
            try:
                goal = json.loads(line)["goal"]
            except (ValueError, KeyError, TypeError) as e:
                print(f"{states} line {number}: not a harvest record ({e})", file=sys.stderr)
                return 1
            if isinstance(goal, str) and len(goal) < 4000:
                goals.append(goal)
    if len(goals) < count:
        print(f"{states}: only {len(goals)} goals under 4,000 characters, {count} asked", file=sys.stderr)
        return 1
    picked = random.Random(seed).sample(goals, count)
    try:
        with open(out, "w", encoding="utf-8") as f:
            for goal in picked:
                f.write(json.dumps({"goal": goal}) + "\n")
    except OSError as e:
        print(f"{out}: cannot write the bodies ({e.strerror})", file=sys.stderr)
        return 1
    print(f"{out}: {count} bodies from {len(goals)} goals of {states}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
