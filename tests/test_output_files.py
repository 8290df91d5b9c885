"""The safe writer of result files (tdhf.report.files): checked before work, atomic only over
regular files, symlinks followed, devices and FIFOs written through, failures named.

Common practice, no source: these are the file-handling rules of the README ("Result files").
"""

from __future__ import annotations

import errno
import json
import os
import stat
import threading

import pytest

from tdhf.errors import InputError, OutputError
from tdhf.report import files
from tdhf.report.files import check_output_file, check_output_folder, claim, remove_stale_temporaries, write_text
from tdhf.report.serialize import write_json


def _names(folder):
    return sorted(p.name for p in folder.iterdir())


def test_new_and_existing_regular_files_are_replaced_atomically_keeping_their_mode(tmp_path):
    path = tmp_path / "out.json"
    write_text(path, "one\n")
    assert path.read_text() == "one\n"
    path.chmod(0o640)
    write_text(path, "two\n")
    assert path.read_text() == "two\n" and stat.S_IMODE(path.stat().st_mode) == 0o640
    assert _names(tmp_path) == ["out.json"]


def test_a_symlink_is_followed_and_stays_a_link(tmp_path):
    (tmp_path / "target.json").write_text("old")
    link = tmp_path / "link.json"
    link.symlink_to("target.json")
    check_output_file(link, "--json")
    write_text(link, "new")
    assert link.is_symlink() and os.readlink(link) == "target.json"
    assert (tmp_path / "target.json").read_text() == "new"
    dangling = tmp_path / "dangling.json"
    dangling.symlink_to("created.json")
    write_text(dangling, "made")
    assert dangling.is_symlink() and (tmp_path / "created.json").read_text() == "made"


def test_a_character_device_is_written_through_not_replaced():
    before = os.stat(os.devnull)
    target = check_output_file(os.devnull, "--json")
    assert not target.atomic
    write_json(os.devnull, {"a": 1})
    after = os.stat(os.devnull)
    assert stat.S_ISCHR(after.st_mode) and after.st_rdev == before.st_rdev and after.st_ino == before.st_ino


def test_a_fifo_is_written_through(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    received = []
    reader = threading.Thread(target=lambda: received.append(fifo.read_text()))
    reader.start()
    write_text(fifo, "through the pipe")
    reader.join(timeout=10)
    assert received == ["through the pipe"] and stat.S_ISFIFO(fifo.stat().st_mode)


@pytest.mark.parametrize("make, reason", [
    (lambda p: p.mkdir(), "is a folder"),
    (lambda p: (p.write_text("keep"), p.chmod(0o444)), "read-only"),
    (lambda p: None, "does not exist"),  # the parent folder is missing (see the path below)
], ids=["folder", "read-only", "missing-parent"])
def test_refused_before_any_work_with_one_line(tmp_path, make, reason):
    path = tmp_path / "out.json" if reason != "does not exist" else tmp_path / "missing" / "out.json"
    make(path)
    with pytest.raises(InputError) as info:
        check_output_file(path, "--json")
    message = str(info.value)
    assert message.startswith(f"--json {path}: ") and reason in message and "\n" not in message
    with pytest.raises(OutputError, match=reason):
        write_text(path, "x", "--json")
    if reason == "read-only":
        assert path.read_text() == "keep"  # even root does not replace it


def test_a_block_device_or_socket_is_refused(tmp_path):
    import socket

    path = tmp_path / "sock"
    server = socket.socket(socket.AF_UNIX)
    server.bind(str(path))
    try:
        with pytest.raises(InputError, match="socket"):
            check_output_file(path, "--csv")
    finally:
        server.close()


def test_an_unwritable_folder_is_refused_before_work(tmp_path, monkeypatch):
    """Root may write anywhere, so the refusal is provoked through os.access."""
    real = os.access
    monkeypatch.setattr(files.os, "access", lambda p, mode: False if str(p) == str(tmp_path) else real(p, mode))
    with pytest.raises(InputError, match="not writable"):
        check_output_file(tmp_path / "out.json", "--json")
    with pytest.raises(InputError, match="not writable"):
        check_output_folder(tmp_path / "new", "series --out")


def test_disk_full_keeps_the_old_file_and_leaves_no_temporary(tmp_path, monkeypatch):
    path = tmp_path / "out.json"
    path.write_text("previous")

    def full(descriptor, data):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(files.os, "write", full)
    with pytest.raises(OutputError) as info:
        write_json(path, {"a": 1}, "--json")
    assert str(info.value) == f"--json {path}: cannot write the file: No space left on device"
    assert path.read_text() == "previous" and _names(tmp_path) == ["out.json"]


def test_a_folder_removed_after_the_check_is_an_output_error(tmp_path):
    folder = tmp_path / "gone"
    folder.mkdir()
    check_output_file(folder / "out.json", "--json")
    folder.rmdir()
    with pytest.raises(OutputError, match="does not exist"):
        write_text(folder / "out.json", "x", "--json")


def test_output_folder_is_created_or_refused(tmp_path):
    made = check_output_folder(tmp_path / "a" / "b", "series --out")
    assert made.is_dir()
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match="is not a folder"):
        check_output_folder(tmp_path / "file", "series --out")
    with pytest.raises(InputError, match="is not a folder"):
        check_output_folder(tmp_path / "file" / "sub", "series --out")


def test_stale_temporaries_are_removed_only_for_their_file(tmp_path):
    path = tmp_path / "he.json"
    for name in (".he.json.abc12345.tmp", ".he.json.zzzzzzzz.tmp", ".ne.json.abc12345.tmp", "he.json"):
        (tmp_path / name).write_text("x")
    assert remove_stale_temporaries(path) == 2
    assert _names(tmp_path) == [".ne.json.abc12345.tmp", "he.json"]


def test_claim_is_exclusive_and_leaves_no_lock_file(tmp_path):
    path = tmp_path / "he.json"
    with claim(path) as first:
        assert first
        with claim(path) as second:
            assert not second  # the same lock, taken twice, conflicts (flock is per open file)
    assert _names(tmp_path) == []
    with claim(path) as again:
        assert again


def test_write_json_refuses_unserializable_data_without_touching_the_file(tmp_path):
    path = tmp_path / "out.json"
    write_json(path, {"a": (1, 2.5)})
    with pytest.raises(TypeError):
        write_json(path, {"a": {1}})
    assert json.loads(path.read_text()) == {"a": [1, 2.5]}
