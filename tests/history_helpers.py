"""Real temporary git repositories for the history tests, built through registry/git.py."""

from __future__ import annotations

from pathlib import Path

from registry.git import Repository, init_repository

PI = ("Lab lead", "lead@lab.example")
POSTDOC = ("Postdoc", "postdoc@lab.example")


def spec_text(spec_id: str = "mouse-diet", *, start: str = "2020-03-02", sd: str = "5.0", alpha: str = "0.05",
              per_group: str = "29", analysis: str = "Welch t-test on week-8 butyrate.", status: str = "draft",
              extra: str = "", amendments: str = "amendments: []\n", title: str = "Diet and butyrate") -> str:
    """A valid spec (two-sample t, difference 4, SD 5: 26 analysable + 10% attrition = 29 per group)."""
    return f"""# invented test spec
id: {spec_id}
title: {title}
status: {status}
data_collection:
  start: {start}
design:
  test: two-sample-t
  alternative: two-sided
  alpha: {alpha}
  power: 0.8
  effect:
    difference: 4.0
    sd: {sd}
  attrition: 0.1
sample_size:
  per_group: {per_group}
analysis_plan: {analysis}
{extra}{amendments}"""


class Lab:
    """A registry repository: write files, commit them with pinned names and dates."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.repo: Repository = init_repository(root)
        self.registry = root / "registry"
        self.registry.mkdir()

    def write(self, name: str, text: str) -> Path:
        path = self.registry / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
        return path

    def commit(self, message: str, date: str, author: tuple[str, str] = PI, committer_date: str | None = None) -> str:
        return self.repo.commit_all(message, author=author, date=date, committer_date=committer_date)
