"""Output files behave like any program's (issue 16 item 3, issue 13 item 5).

The rules are those of common practice for Unix command-line tools (what
``cat > PATH`` or ``sort -o PATH`` do): a new file gets 0666 less the umask,
an overwritten file keeps its mode, a symbolic link is written through, a
FIFO or character device is written in place.
"""

import os
import stat
import threading

import pytest

from chain.fileio import OutputPathError, check_output, write_atomically


def test_new_file_respects_the_umask(tmp_path):
    old = os.umask(0o027)
    try:
        write_atomically(tmp_path / "a.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "a.txt").stat().st_mode) == 0o640
    old = os.umask(0o002)
    try:
        write_atomically(tmp_path / "b.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "b.txt").stat().st_mode) == 0o664


def test_overwritten_file_keeps_its_mode(tmp_path):
    target = tmp_path / "r.txt"
    target.write_text("old")
    target.chmod(0o604)
    write_atomically(target, "new")
    assert target.read_text() == "new"
    assert stat.S_IMODE(target.stat().st_mode) == 0o604


def test_symlink_target_is_written_and_the_link_stays(tmp_path):
    real = tmp_path / "real.txt"
    real.write_text("old")
    link = tmp_path / "link.txt"
    link.symlink_to(real)
    write_atomically(link, "new")
    assert link.is_symlink()
    assert real.read_text() == "new"


def test_dangling_symlink_creates_its_target(tmp_path):
    link = tmp_path / "link.txt"
    link.symlink_to(tmp_path / "made.txt")
    write_atomically(link, "new")
    assert link.is_symlink() and (tmp_path / "made.txt").read_text() == "new"


def test_fifo_is_written_in_place(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    got = []

    def read():
        with open(fifo, "rb") as fh:
            got.append(fh.read())

    reader = threading.Thread(target=read)
    reader.start()
    check_output(fifo)
    write_atomically(fifo, "through the pipe")
    reader.join(timeout=10)
    assert got == [b"through the pipe"]
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["pipe"]  # no temporary left behind


def test_character_device_is_written_in_place():
    check_output("/dev/null")
    write_atomically("/dev/null", "gone")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)


def test_open_descriptor_is_written_in_place(tmp_path):
    target = tmp_path / "out.txt"
    with open(target, "wb") as fh:
        path = f"/dev/fd/{fh.fileno()}"
        check_output(path)
        write_atomically(path, "via descriptor")
        fh.flush()
    assert target.read_text() == "via descriptor"


@pytest.mark.parametrize("path, words", [
    ("{tmp}", "it is a folder"),
    ("{tmp}/missing/x.txt", "does not exist"),
    ("/proc/no-such-thing.txt", "no such file"),
    ("/dev/fd/987", "no such file"),
    ("{tmp}/input.chain", "it is the input file"),
])
def test_bad_output_paths_are_refused_in_plain_words(tmp_path, path, words):
    (tmp_path / "input.chain").write_text("title x\n")
    with pytest.raises(OutputPathError, match=words):
        check_output(path.format(tmp=tmp_path), inputs=[tmp_path / "input.chain"])


def test_input_reached_through_a_symlink_is_refused(tmp_path):
    (tmp_path / "input.chain").write_text("title x\n")
    (tmp_path / "alias.chain").symlink_to(tmp_path / "input.chain")
    with pytest.raises(OutputPathError, match="input file"):
        check_output(tmp_path / "alias.chain", inputs=[tmp_path / "input.chain"])


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write into a read-only folder")
def test_unwritable_folder_is_refused(tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o555)
    try:
        with pytest.raises(OutputPathError, match="permission denied"):
            check_output(ro / "x.txt")
    finally:
        ro.chmod(0o755)
