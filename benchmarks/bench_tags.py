"""``check`` on a registry of 40 specs with 20,000 registration tags vs git's own time to list them.

The reference is ``git for-each-ref --format=%(refname)%(contents)`` over the same tags (git reading
every tag object once). Target: the tags' share of check (check with tags minus check without) within
10x of git's time, i.e. linear in the tags. Prints the ratio and whether this run met it.
"""

from __future__ import annotations

import contextlib
import io
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from registry.cli import main  # noqa: E402
from tests.test_hardening import many_tags_lab  # noqa: E402

TARGET = 10.0


def _time_check(folder: Path) -> float:
    start = time.perf_counter()
    with contextlib.redirect_stdout(io.StringIO()) as out:
        status = main(["check", "--no-cache", str(folder), "--json"])  # the tags are read every time
    elapsed = time.perf_counter() - start
    assert status == 0 and '"verdict": "clean"' in out.getvalue(), out.getvalue()[:400]
    return elapsed


def run() -> None:
    with tempfile.TemporaryDirectory() as scratch:
        plain = many_tags_lab(Path(scratch) / "plain", versions=0)
        tagged = many_tags_lab(Path(scratch) / "tagged")
        without = min(_time_check(plain.registry) for _ in range(2))
        measured = min(_time_check(tagged.registry) for _ in range(2))
        reference = min(_time_git(tagged.root) for _ in range(2))
    ratio = (measured - without) / reference
    print(f"check, 40 specs: no tags {without:.2f} s, 20,000 tags {measured:.2f} s; git lists the tags in "
          f"{reference:.2f} s; ratio {ratio:.1f}x (target <= {TARGET:g}x): {'met' if ratio <= TARGET else 'NOT met'}")


def _time_git(root: Path) -> float:
    import subprocess

    start = time.perf_counter()
    listing = subprocess.run(["git", "for-each-ref", "--format=%(refname)%(contents)", "refs/tags"], cwd=root,
                             capture_output=True, check=True).stdout
    elapsed = time.perf_counter() - start
    assert listing.count(b"--- prespec registration ---") == 20_000
    return elapsed


if __name__ == "__main__":
    run()
