"""Terminal safety: markup, action markup and control sequences in every free-text field of a dataset.

The strings go into species names and notes, a form label, a source's title and authors, a flag's note,
a reaction's equation and the dataset's name and title. ``check`` (text and JSON) then runs under a
real pseudo-terminal: none of the raw sequences may reach the bytes written, and the text that is
shown must appear escaped (``\\x1b``) or, for markup, literally. A paired control writes the same
strings raw to the pseudo-terminal, to show that the scan would catch them.
"""

from __future__ import annotations

import json
import os
import pty
import select
import subprocess
import sys
import time
from pathlib import Path

import pytest

from tablekeeper.store import Dataset
from tablekeeper.text import printable

OSC52 = "\x1b]52;c;ZXZpbA==\x07"
HOSTILE = {
    "action markup": "[@click=app.quit]x[/]",
    "closing tag": "[/nope]",
    "open tag": "[bold",
    "style markup": "[red on white]loud[/]",
    "osc52": OSC52,
    "csi clear": "\x1b[2J",
    "c1 csi": "\x9b31m",
    "bel": "ring\x07",
    "backspace": "bac\x08\x08ck",
    "bidi": "\u202egnp.exe",
}
#: Raw byte sequences that must never reach the terminal.
RAW = [b"\x1b]52", b"\x1b[2J", "\x9b".encode(), b"\x9b", b"\x07", b"\x08", "\u202e".encode()]


def _hostile_dataset(clean: Dataset) -> Path:
    root = clean.root
    all_text = " ".join(HOSTILE.values())
    sp = clean.load("species", "h2o-l")
    clean.save(
        "species",
        dict(sp, name="water " + all_text, notes="notes " + all_text, form=OSC52 + "x"),
        expected_revision=sp["revision"],
    )
    src = clean.load("sources", "codata-1989")
    clean.save(
        "sources",
        dict(src, title="T " + all_text, authors=[v for v in HOSTILE.values()]),
        expected_revision=src["revision"],
    )
    for label, text in HOSTILE.items():
        from tablekeeper import flags

        flags.raise_flag(clean, "co2-g", "dfH298", f"{label}: {text}")
    clean.save(
        "reactions",
        {"id": "r1", "equation": "H2(g) " + OSC52 + " = \x1b[2J", "drH": {"value": -1.0, "uncertainty": 0.1}},
        expected_revision=None,
    )
    meta = json.loads((root / "dataset.json").read_text())
    meta.update(name="x\x1b[2J" + OSC52, title="[@click=app.quit]t[/] " + OSC52)
    (root / "dataset.json").write_text(json.dumps(meta))
    return root


def _run_in_pty(args: list[str]) -> tuple[int, bytes]:
    """Run a command with stdout and stderr on a pseudo-terminal; return its exit status and bytes."""
    master, slave = pty.openpty()
    proc = subprocess.Popen(
        args,
        stdout=slave,
        stderr=slave,
        stdin=subprocess.DEVNULL,
        close_fds=True,
        env=dict(os.environ, TERM="xterm-256color", COLUMNS="100"),
    )
    os.close(slave)
    chunks = []
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        r, _, _ = select.select([master], [], [], 0.2)
        if r:
            try:
                data = os.read(master, 65536)
            except OSError:  # EIO: the child closed the terminal
                break
            if not data:
                break
            chunks.append(data)
        elif proc.poll() is not None:
            continue
    os.close(master)
    return proc.wait(timeout=30), b"".join(chunks)


@pytest.mark.timeout(180)
@pytest.mark.parametrize("fmt", ["text", "json"])
def test_check_output_on_a_terminal_carries_no_control_sequence(clean_dataset, fmt):
    root = _hostile_dataset(clean_dataset)
    rc, out = _run_in_pty([sys.executable, "-m", "tablekeeper.cli", "check", str(root), "--format", fmt])
    text = out.decode("utf-8", errors="replace")
    assert "Traceback" not in text, text[-2000:]
    assert rc in (0, 1), (rc, text[-1000:])
    found = [seq for seq in RAW if seq in out]
    assert not found, f"raw sequences reached the terminal: {found}"
    assert b"\x1b" not in out, "an escape character reached the terminal"
    if fmt == "text":
        # The flag check shows each note: every hostile string must be there, escaped or literal.
        shown = [label for label, s in HOSTILE.items() if printable(s) in text]
        assert len(shown) == len(HOSTILE), f"not shown literally: {sorted(set(HOSTILE) - set(shown))}"
        assert printable(OSC52) == "\\x1b]52;c;ZXZpbA==\\x07"
    print(
        f"check --format {fmt} under a pty: {len(out)} bytes, 0 of {len(RAW)} raw sequences, "
        f"{len(HOSTILE)} hostile strings in {7} kinds of field"
    )


@pytest.mark.timeout(180)
@pytest.mark.parametrize("fmt", ["text", "json"])
def test_diff_output_on_a_terminal_carries_no_control_sequence(clean_dataset, tmp_path, fmt):
    """``diff`` shows names and labels old and new: the same scan over its output."""
    import shutil

    old = tmp_path / "old"
    shutil.copytree(clean_dataset.root, old)
    root = _hostile_dataset(clean_dataset)
    rc, out = _run_in_pty([sys.executable, "-m", "tablekeeper.cli", "diff", str(old), str(root), "--format", fmt])
    text = out.decode("utf-8", errors="replace")
    assert rc == 0 and "Traceback" not in text, (rc, text[-1500:])
    found = [seq for seq in RAW if seq in out]
    assert not found and b"\x1b" not in out, f"diff --format {fmt}: raw sequences reached the terminal: {found}"
    assert "[@click=app.quit]x[/]" in text


@pytest.mark.timeout(60)
def test_control_raw_writes_are_seen_by_the_scan():
    """Printing the same strings raw: the scan above finds them, so it can fail."""
    code = "import sys; sys.stdout.write(" + repr(" ".join(HOSTILE.values())) + ")"
    rc, out = _run_in_pty([sys.executable, "-c", code])
    found = [seq for seq in RAW if seq in out]
    print(f"control: raw print puts {len(found)} of {len(RAW)} sequences on the terminal")
    assert rc == 0 and len(found) >= 5, found


def _screen_text(app) -> str:
    import html
    import re

    svg = app.export_screenshot()
    return html.unescape(re.sub(r"<[^>]+>", "", svg)).replace("\xa0", " ")


@pytest.mark.timeout(120)
async def test_app_shows_hostile_text_literally(clean_dataset):
    """The terminal app, headless: the record and flag screens of the hostile dataset. The app must not
    exit (an interpreted ``[@click=app.quit]`` would quit on a click) and the text must be on screen
    as written, control characters escaped."""
    app_mod = pytest.importorskip("tablekeeper.tui.app")
    root = _hostile_dataset(clean_dataset)
    app = app_mod.create_app(root, poll_interval=3600)
    seen: dict[str, str] = {}
    async with app.run_test(size=(160, 50)) as pilot:
        while app.snapshot is None:
            await pilot.pause(0.05)
        await pilot.press("slash", *"h2o-l", "enter", "enter")
        await pilot.pause(0.3)
        seen["record"] = _screen_text(app)
        await pilot.click(offset=(40, 10))  # a click anywhere: markup actions must not fire
        await pilot.press("3")
        await pilot.pause(0.3)
        seen["flags"] = _screen_text(app)
        assert app.is_running and app.return_code is None, "the app exited"
    record, flags = seen["record"], seen["flags"]
    assert "[@click=app.quit]x[/]" in record, "action markup in the source title not shown literally"
    assert printable(OSC52) in record, "the escaped OSC 52 sequence of the form label is not shown"
    for text in (record, flags):
        assert not any(c in text for c in ("\x1b", "\x9b", "\x07", "\x08", "\u202e")), (
            "a raw control on screen"
        )
    shown_flags = [label for label, s in HOSTILE.items() if printable(s)[:12] in flags]
    print(
        f"app: still running after a click; record screen shows markup literally; flags screen shows "
        f"{len(shown_flags)} of {len(HOSTILE)} hostile notes literally"
    )
    assert len(shown_flags) >= 5, f"flag notes not shown literally: {sorted(set(HOSTILE) - set(shown_flags))}"
