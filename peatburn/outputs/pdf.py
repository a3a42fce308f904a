"""report.pdf: report.html printed to PDF by a headless chromium.

The report is a self-contained HTML page with print styles (A4, no navigation, figures and table
rows kept whole), so the PDF is the same report on paper. Chromium is run with a fresh, temporary
profile and with its network features off (no background networking, component updates, sync or
QUIC); the page itself loads nothing from the network. The PDF is written under a temporary name
and renamed when complete.

Chromium is found on ``PATH`` as ``chromium`` or ``chromium-browser`` (Debian and Ubuntu package
names). It is not a Python dependency: install it with the system's package manager
(``apt-get install chromium``).

Why a browser and not a pip-installable HTML-to-PDF library: WeasyPrint was measured on the demo's
report and a dossier (docs/performance.md, "report.pdf: headless chromium or WeasyPrint"). It prints the
dossiers as well, but cuts the report's wide tables at the page edge where chromium shrinks the page to
fit, and it needs the system's Pango all the same.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import tempfile
from pathlib import Path

from ..errors import InputFileError
from ..io.writers import atomic_path

__all__ = ["CHROMIUM_NAMES", "CHROMIUM_FLAGS", "find_chromium", "chromium_command", "print_pdf"]

#: Executable names looked up on PATH, in order.
CHROMIUM_NAMES = ("chromium", "chromium-browser")

#: Flags of every headless run: no sandbox (containers, root), no GPU, and nothing that talks to
#: the network on its own (QUIC, background networking, component updates, sync, first-run pages).
CHROMIUM_FLAGS = (
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
)

INSTALL_HINT = "install chromium (apt-get install chromium)"


def find_chromium(executable: str | os.PathLike | None = None) -> str:
    """Path of the chromium executable: ``executable`` if given, else ``chromium`` or
    ``chromium-browser`` on PATH.

    Raises
    ------
    InputFileError
        When none is found; the message names the fix.
    """
    if executable is not None:
        found = shutil.which(os.fspath(executable))
        if found:
            return found
        raise InputFileError(f"report.pdf: chromium executable {os.fspath(executable)!r} not found or not "
                             f"executable; {INSTALL_HINT} or give the right path")
    for name in CHROMIUM_NAMES:
        found = shutil.which(name)
        if found:
            return found
    raise InputFileError(f"report.pdf: no chromium on PATH (looked for {', '.join(CHROMIUM_NAMES)}); "
                         f"{INSTALL_HINT}, or leave out --pdf")


def chromium_command(executable: str, profile_dir: str | os.PathLike, *args: str) -> list[str]:
    """The command line of one headless chromium run with a fresh profile folder."""
    return [executable, *CHROMIUM_FLAGS, f"--user-data-dir={os.fspath(profile_dir)}", *args]


def _run(cmd: list[str], timeout: float) -> subprocess.CompletedProcess:
    """Run chromium in its own process group; on timeout end that group (only what we started)."""
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, stdin=subprocess.DEVNULL,
                            start_new_session=True)
    try:
        out, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        try:
            os.killpg(proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        proc.communicate()
        raise InputFileError(f"report.pdf: chromium did not finish within {timeout:g} s; "
                             f"try again, or print report.html from a browser") from None
    return subprocess.CompletedProcess(cmd, proc.returncode, out, err)


def print_pdf(html: str | os.PathLike, pdf: str | os.PathLike | None = None, *,
              executable: str | os.PathLike | None = None, timeout: float = 120.0) -> Path:
    """Print ``html`` (a report.html) to ``pdf`` (default: the same name with ``.pdf``) with headless
    chromium; returns the PDF's path.

    Parameters
    ----------
    html : path
        The HTML file to print.
    pdf : path, optional
        Where to write the PDF; written atomically (temporary name, then rename).
    executable : path, optional
        A chromium executable to use instead of the one found on PATH.
    timeout : float
        Seconds to wait for chromium [s].

    Raises
    ------
    MissingInputError
        When ``html`` does not exist (an :class:`InputFileError`).
    InputFileError
        When chromium is missing, fails, times out, or writes no PDF.
    """
    from ..errors import MissingInputError

    html = Path(html)
    if not html.is_file():
        raise MissingInputError(f"report.pdf: {html} not found; run the estimate first (it writes report.html)")
    pdf = Path(pdf) if pdf is not None else html.with_suffix(".pdf")
    exe = find_chromium(executable)
    with tempfile.TemporaryDirectory(prefix="peatburn-chromium-") as profile, \
            atomic_path(pdf, suffix=".pdf") as tmp:
        # chromium writes the PDF itself; the atomic path's empty placeholder is replaced by it
        cmd = chromium_command(exe, profile, "--no-pdf-header-footer", "--print-to-pdf-no-header",
                               f"--print-to-pdf={tmp}", html.resolve().as_uri())
        res = _run(cmd, timeout)
        head = tmp.read_bytes()[:5] if tmp.exists() else b""
        if head != b"%PDF-":
            tail = (res.stderr or b"").decode("utf-8", "replace").strip().splitlines()[-3:]
            raise InputFileError(f"report.pdf: chromium wrote no PDF (exit status {res.returncode}"
                                 f"{': ' + ' | '.join(tail) if tail else ''}); check that chromium runs headless "
                                 f"here, or print report.html from a browser")
    return pdf
