"""Output files: atomic for regular files, through symbolic links, streamed to FIFOs, '-' for
standard output, special files refused; the picture format follows the extension.

Checked on a real symbolic link and a real FIFO in a temporary folder. File signatures (PNG
"\\x89PNG\\r\\n\\x1a\\n", PDF "%PDF-") are those of the PNG specification (W3C/ISO 15948) and
ISO 32000 (common practice).
"""

from __future__ import annotations

import json
import os
import stat
import threading
from pathlib import Path

import pytest
from typer.testing import CliRunner

from budget.cli import app
from budget.problems import InputError
from budget.report.files import resolve_output, write_text

ROOT = Path(__file__).resolve().parent.parent
CIRCUIT, MODEL = str(ROOT / "circuits" / "echo_xy4.qasm"), str(ROOT / "circuits" / "fen_q8.toml")


def _cli(*args: str):
    return CliRunner().invoke(app, list(args))


def test_regular_file_is_replaced_atomically_and_keeps_its_mode(tmp_path):
    f = tmp_path / "out.json"
    f.write_text("old")
    os.chmod(f, 0o640)
    write_text(f, "new")
    assert f.read_text() == "new" and stat.S_IMODE(f.stat().st_mode) == 0o640
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]  # no temporary file left


def test_symlink_stays_a_link_and_its_target_gets_the_content(tmp_path):
    (tmp_path / "data").mkdir()
    target = tmp_path / "data" / "real.json"
    target.write_text("old")
    link = tmp_path / "link.json"
    link.symlink_to(target)
    res = _cli("analyze", CIRCUIT, "-e", MODEL, "--json", str(link), "--width", "100")
    assert res.exit_code == 0, res.output
    assert link.is_symlink() and os.readlink(link) == str(target)
    assert json.loads(target.read_text())["schema_version"] == 2
    dangling = tmp_path / "dangling.json"
    dangling.symlink_to(tmp_path / "data" / "new.json")
    write_text(dangling, "x")
    assert dangling.is_symlink() and (tmp_path / "data" / "new.json").read_text() == "x"


def test_fifo_is_written_as_a_stream_not_replaced(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    got: list[bytes] = []
    reader = threading.Thread(target=lambda: got.append(Path(fifo).read_bytes()))
    reader.start()
    res = _cli("analyze", CIRCUIT, "-e", MODEL, "--json", str(fifo), "--width", "100")
    reader.join(timeout=60)
    assert res.exit_code == 0, res.output
    assert stat.S_ISFIFO(fifo.stat().st_mode)  # still a FIFO
    assert json.loads(got[0])["schema_version"] == 2


def test_dash_is_standard_output_and_the_view_goes_to_stderr():
    res = CliRunner().invoke(app, ["analyze", CIRCUIT, "-e", MODEL, "--json", "-", "--width", "100"])
    assert res.exit_code == 0, res.stderr
    assert json.loads(res.stdout)["schema_version"] == 2
    assert "error budget" in res.stderr


def test_folders_and_block_devices_are_refused(tmp_path):
    with pytest.raises(InputError, match="is a folder"):
        resolve_output(tmp_path)
    with pytest.raises(InputError, match="does not exist"):
        resolve_output(tmp_path / "no" / "x.json")
    block = next((p for p in ("/dev/loop0", "/dev/sda", "/dev/vda") if Path(p).exists()
                  and stat.S_ISBLK(os.stat(p).st_mode)), None)
    if block is not None:
        with pytest.raises(InputError, match="block device"):
            resolve_output(block)
    assert resolve_output("/dev/null")[1] == "stream"  # a character device is written to directly


@pytest.mark.parametrize("name, magic", [("d.png", b"\x89PNG\r\n\x1a\n"), ("d.pdf", b"%PDF-"), ("d.svg", b"<svg")])
def test_plot_format_follows_the_extension(tmp_path, name, magic):
    out = tmp_path / name
    res = _cli("depth", CIRCUIT, "-e", MODEL, "--max-cycles", "20", "--points", "3", "--plot", str(out), "-q")
    assert res.exit_code == 0, res.output
    assert out.read_bytes().startswith(magic)


def test_unknown_picture_extension_is_refused_before_any_work(tmp_path):
    out = tmp_path / "d.jpg"
    res = _cli("depth", CIRCUIT, "-e", MODEL, "--max-cycles", "20", "--plot", str(out), "-q")
    assert res.exit_code == 2 and "extension" in res.output and ".png" in res.output
    assert not out.exists() and "Traceback" not in res.output


def test_version_and_shared_flags():
    res = _cli("--version")
    assert res.exit_code == 0 and res.output.startswith("budget ")
    for command in ("analyze", "depth", "report", "tolerances", "cost"):
        text = _cli(command, "--help").output
        assert "--by-pair" in text and "--by-operation" in text, command
    res = _cli("analyze", CIRCUIT, "-e", MODEL, "--by-pair", "--by-operation")
    assert res.exit_code == 2 and "choose one grouping" in res.output
    parity = str(ROOT / "circuits" / "parity_cycle.qasm")
    res = _cli("analyze", parity, "-e", MODEL, "--by-operation", "--width", "150")
    assert res.exit_code == 0 and "cz q[2],q[3] @10" in res.output  # one family per operation, with its line
    res = _cli("depth", parity, "-e", MODEL, "--by-operation", "--max-cycles", "5", "--points", "2", "-q")
    assert res.exit_code == 0, res.output


def test_report_writes_again_into_an_existing_folder(tmp_path):
    out = tmp_path / "rep"
    for _ in range(2):  # the second run finds the folder and replaces its files
        res = _cli("report", CIRCUIT, "-e", MODEL, "--target", "0.3", "--out", str(out), "--max-cycles", "20",
                   "--points", "3", "-q")
        assert res.exit_code == 0, res.output
    assert (out / "report.html").is_file() and (out / "report.md").is_file()


def test_every_command_writes_its_json_or_picture_to_standard_output():
    res = _cli("tolerances", CIRCUIT, "-e", MODEL, "--target", "0.05", "--json", "-")
    assert res.exit_code == 0, res.stderr
    assert json.loads(res.stdout)["kind"] == "tolerances"
    res = _cli("depth", CIRCUIT, "-e", MODEL, "--max-cycles", "10", "--points", "2", "--plot", "-", "-q")
    assert res.exit_code == 0, res.stderr
    assert res.stdout.lstrip().startswith("<svg") and "depth curves" in res.stderr
    res = _cli("depth", CIRCUIT, "-e", MODEL, "--max-cycles", "10", "--json", "-", "--plot", "-")
    assert res.exit_code == 2 and "only one output" in res.output
