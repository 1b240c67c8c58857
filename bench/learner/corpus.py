"""Build the Debian package index corpus and a seeded 80/20 split.

Reads `apt-cache dumpavail` on stdin: one stanza per package. Keeps the first
line of the Description field and the Section field (the "contrib/" or
"non-free/"/"non-free-firmware/" prefix stripped), de-duplicated by package name.
Writes train.tsv and test.tsv (section TAB text) into the directory given.
"""
import random
import sys

out = sys.argv[1]
seed = int(sys.argv[2]) if len(sys.argv) > 2 else 1
rows, seen = [], set()
pkg = sec = desc = None


def flush():
    if pkg and sec and desc and pkg not in seen:
        seen.add(pkg)
        rows.append((sec.split("/")[-1], " ".join(desc.split())))


for line in sys.stdin:
    line = line.rstrip("\n")
    if not line:
        flush()
        pkg = sec = desc = None
    elif line.startswith("Package:"):
        pkg = line[8:].strip()
    elif line.startswith("Section:"):
        sec = line[8:].strip()
    elif line.startswith("Description:"):
        desc = line[12:].strip()
flush()
rows.sort()
random.Random(seed).shuffle(rows)
cut = int(0.8 * len(rows))
for name, part in (("train.tsv", rows[:cut]), ("test.tsv", rows[cut:])):
    with open(f"{out}/{name}", "w") as f:
        for s, t in part:
            f.write(f"{s}\t{t}\n")
print(f"{len(rows)} packages, {len(set(s for s, _ in rows))} sections, "
      f"{cut} train, {len(rows) - cut} test", file=sys.stderr)
