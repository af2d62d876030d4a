#!/usr/bin/env python3
"""The layers of src/ go one way (docs/architecture.md).

Each folder under src/ is a library; a library may include its own headers and
those of the libraries listed for it below, never one above it. This reads
every `#include "x/..."` in src/ and fails, naming the file and line, on an
include that is not allowed or a folder missing from the table. Run by ctest
(test `architecture.layers`)."""
import pathlib
import re
import sys

# Library -> the libraries it may include (lower layers only).
ALLOWED = {
    "core": set(),
    "io": {"core"},
    "sketch": {"core"},
    "screen": {"core"},
    "stats": {"core"},
    "report": {"core"},
    "stages": {"core", "io", "sketch", "screen", "stats"},
    "pipeline": {"core", "io", "sketch", "screen", "stats", "stages", "report"},
    "audit": {"core", "io", "sketch", "screen", "stats", "stages"},
    "store": {"core", "io", "sketch", "screen", "stats", "stages", "report", "pipeline"},
    "cli": {"core", "io", "sketch", "screen", "stats", "stages", "report", "pipeline", "audit", "store"},
}

INCLUDE = re.compile(r'^\s*#\s*include\s+"([a-z_]+)/')


def main(src: pathlib.Path) -> int:
    problems = []
    folders = sorted(p.name for p in src.iterdir() if p.is_dir())
    for name in folders:
        if name not in ALLOWED:
            problems.append(f"src/{name}/: a library missing from the layer table in {__file__}")
    for path in sorted(src.rglob("*")):
        if path.suffix not in (".h", ".cc") or not path.is_file():
            continue
        lib = path.relative_to(src).parts[0]
        allowed = ALLOWED.get(lib, set()) | {lib}
        for no, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            m = INCLUDE.match(line)
            if m and m.group(1) in ALLOWED and m.group(1) not in allowed:
                problems.append(f"{path}:{no}: {lib} includes {m.group(1)}/, a library above or beside it")
    for p in problems:
        print(p)
    print(f"layers: {len(problems)} problem(s) in {len(folders)} libraries")
    return 1 if problems else 0


def self_test() -> int:
    """The check itself: an upward include must fail, a downward one pass."""
    import tempfile
    with tempfile.TemporaryDirectory() as d:
        root = pathlib.Path(d)
        for lib in ALLOWED:
            (root / lib).mkdir()
        (root / "stages" / "a.h").write_text('#include "core/status.h"\n#include "sketch/lsh.h"\n')
        good = main(root)
        (root / "report" / "b.cc").write_text('#include "stages/stage.h"\n')
        bad = main(root)
    ok = good == 0 and bad == 1
    print("self-test:", "ok" if ok else "FAILED (the check does not catch an upward include)")
    return 0 if ok else 1


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "--self-test":
        sys.exit(self_test())
    sys.exit(main(pathlib.Path(sys.argv[1] if len(sys.argv) > 1 else "src")))
