"""Read `apt-cache dumpavail` output, print one one-line Description per package
(the first version listed for each package name), for the throughput benchmark.
Source: the Debian package index of the machine running the benchmark."""
import sys

seen = set()
pkg = desc = None


def flush():
    global pkg, desc
    if pkg and desc and pkg not in seen:
        seen.add(pkg)
        print(desc.replace("\t", " "))
    pkg = desc = None


with open(sys.argv[1], encoding="utf-8", errors="replace") as f:
    for line in f:
        if line == "\n":
            flush()
        elif line.startswith("Package: "):
            pkg = line[9:].strip()
        elif line.startswith("Description: "):
            desc = line[13:].strip()
flush()
