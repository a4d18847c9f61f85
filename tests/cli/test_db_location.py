"""A database location that is not a usable URL is a mistake in what the user typed: exit status 2
with the URL and the accepted forms named; a database that cannot be reached or written is a
failure: exit status 1 (the project's CLI convention, common practice for command-line tools,
no published source)."""

from __future__ import annotations

import pytest

from vetting.cli.main import run


@pytest.mark.parametrize("url, words", [
    ("nonsense://x", "nonsense"),
    ("::::", "not a database URL"),
    ("postgresql+nodriver://a/b", "postgresql+nodriver://a/b"),
])
def test_a_bad_database_url_is_bad_input(capsys, url, words):
    status = run(["--db", url, "list", "instruments"])
    err = capsys.readouterr().err
    assert status == 2
    assert words in err


def test_a_missing_folder_is_a_failure_not_bad_input(capsys, tmp_path):
    status = run(["--db", f"sqlite:///{tmp_path / 'no-such-folder' / 'x.db'}", "list", "instruments"])
    err = capsys.readouterr().err
    assert status == 1
    assert "does not exist" in err
