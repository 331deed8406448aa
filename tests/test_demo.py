"""``prespec demo``: a real git repository with pinned, dated history, then check on it."""

from __future__ import annotations

from registry.git import find_repository


def test_demo_builds_a_dated_registry_and_returns_checks_status(tmp_path, run):
    target = tmp_path / "demo"
    result = run("demo", target)
    assert result.status == 1  # the demo includes drift, an uncommitted edit and an underpowered design
    assert str(target) in result.out
    for word in ("drift", "amended", "uncommitted", "underpowered", "oversized"):
        assert word in result.out, word
    repo = find_repository(target)
    assert repo is not None and not repo.is_shallow()
    commits = [entry.commit for entry in repo.log()]
    assert commits[0].committer_date.isoformat() == "2024-01-15T10:00:00+01:00"
    assert all(c.author_email.endswith("@example.org") for c in commits)
    as_json = run("check", "--json", target / "registry").json()
    verdicts = {s["id"]: s["verdict"] for s in as_json["specs"]}
    assert verdicts["exercise-blood-pressure"] == "drift"
    assert verdicts["organoid-doubling"] == "uncommitted"
    assert verdicts["sirt3-knockdown"] == "underpowered"
    assert verdicts["biochar-tomato"] == "oversized"
    histories = {s["id"]: s["history"]["verdict"] for s in as_json["specs"]}
    assert histories["fibre-butyrate"] == "clean" and histories["caffeine-reaction-time"] == "amended"
    assert run("verify", "fibre-butyrate", target / "registry").status == 0


def test_demo_is_reproducible(tmp_path, run):
    # pinned names, e-mails and dates: the same input gives the same commit ids
    run("demo", tmp_path / "a")
    run("demo", tmp_path / "b")
    assert find_repository(tmp_path / "a").head() == find_repository(tmp_path / "b").head()


def test_demo_refuses_a_non_empty_folder(tmp_path, run):
    (tmp_path / "keep.txt").write_text("mine", encoding="utf-8")
    result = run("demo", tmp_path)
    assert result.status == 2 and "not an empty folder" in result.err
    assert [p.name for p in tmp_path.iterdir()] == ["keep.txt"]
    assert (tmp_path / "keep.txt").read_text(encoding="utf-8") == "mine"


def test_demo_default_folder_is_new(run, monkeypatch, tmp_path):
    monkeypatch.setenv("TMPDIR", str(tmp_path))
    import tempfile

    monkeypatch.setattr(tempfile, "tempdir", None)
    result = run("demo")
    made = [p for p in tmp_path.iterdir() if p.name.startswith("prespec-demo-")]
    assert len(made) == 1 and str(made[0]) in result.out
