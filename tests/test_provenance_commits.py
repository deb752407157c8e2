"""The reports' provenance names each input folder's commit and says when the circuit files
differ from it (`git status`; the files inside a work tree are those under its top folder by
path, not by the text of the path)."""

from __future__ import annotations

import shutil
import subprocess

import pytest

from harness.report.provenance import _commits

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="needs git")


def _git(folder, *args) -> None:
    subprocess.run(["git", "-C", str(folder), *args], check=True, capture_output=True)


def test_a_changed_file_is_reported_even_beside_a_folder_whose_name_extends_the_top(tmp_path):
    """/x/repo holds a changed a.toml; /x/repo2 (no work tree) holds b.toml.  The text
    '/x/repo2/b.toml' starts with '/x/repo', but the file is not in that work tree: the
    status query must not name it (git then fails and the change went unreported)."""
    repo, sibling = tmp_path / "repo", tmp_path / "repo2"
    repo.mkdir()
    sibling.mkdir()
    _git(repo, "init", "-q")
    (repo / "a.toml").write_text("title = 'a'\n", encoding="utf-8")
    _git(repo, "add", "a.toml")
    _git(repo, "-c", "user.name=t", "-c", "user.email=t@example.invalid", "commit", "-qm", "a")
    (repo / "a.toml").write_text("title = 'changed'\n", encoding="utf-8")
    (sibling / "b.toml").write_text("title = 'b'\n", encoding="utf-8")
    alone = _commits({str(repo / "a.toml"): None})
    both = _commits({str(repo / "a.toml"): None, str(sibling / "b.toml"): None})
    assert list(alone.values())[0].endswith("with local changes to the circuit files")
    assert both == alone
