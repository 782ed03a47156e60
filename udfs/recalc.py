"""Recalculate spreadsheet files in LibreOffice Calc, headless, and read back the values it computed.

openpyxl writes formulas without cached results. A file converted here by
LibreOffice (``soffice --headless --convert-to xlsx``) carries LibreOffice's
own results for every formula, so it can be read with
``openpyxl.load_workbook(path, data_only=True)``. This lets tests check a
workbook's formulas against the engine with a spreadsheet program from
outside the project.

Recalculation on load
---------------------
LibreOffice computes formula cells that have no cached result, but by default
it keeps cached results that a file already carries (the "recalculation on
file load" setting for Excel 2007 and newer files is "never" out of the box).
A file with stale cached results would then be converted with stale values.
Every call here therefore starts LibreOffice with its own throw-away profile
in which that setting (``/org.openoffice.Office.Calc/Formula/Load``,
``OOXMLRecalcMode`` and ``ODFRecalcMode``) is 0, "always recalculate". The
private profile also lets several conversions run at the same time.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import tempfile
from pathlib import Path

from unbend import UnbendError

__all__ = ["RecalcError", "find_soffice", "convert", "recalculate", "recalculate_many"]

#: Seconds one LibreOffice run may take before it is stopped.
DEFAULT_TIMEOUT = 180.0

_PROFILE_SETTINGS = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema" \
xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="OOXMLRecalcMode" oor:op="fuse">\
<value>0</value></prop></item>
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="ODFRecalcMode" oor:op="fuse">\
<value>0</value></prop></item>
</oor:items>
"""


class RecalcError(UnbendError):
    """LibreOffice was not found, failed, timed out, or wrote no output."""


def find_soffice(soffice: str | os.PathLike | None = None) -> str:
    """Path of the LibreOffice ``soffice`` program.

    Parameters
    ----------
    soffice : str or path, optional
        An explicit program path; by default ``soffice`` is looked up on PATH.

    Raises
    ------
    RecalcError
        When the program cannot be found.
    """
    if soffice is not None:
        p = shutil.which(str(soffice))
        if p is None:
            raise RecalcError(f"LibreOffice program not found at {soffice!s}.")
        return p
    p = shutil.which("soffice")
    if p is None:
        raise RecalcError("LibreOffice (soffice) is not installed or not on PATH; it is needed to recalculate "
                          "spreadsheet files outside a spreadsheet program.")
    return p


def convert(paths, out_dir, to: str = "xlsx", *, timeout: float = DEFAULT_TIMEOUT,
            soffice: str | os.PathLike | None = None) -> list[Path]:
    """Open files in LibreOffice Calc headless, recalculate, and save them as ``to`` in ``out_dir``.

    All files go through one LibreOffice run, which is much faster than one
    run per file.

    Parameters
    ----------
    paths : path or sequence of paths
        Spreadsheet files to convert.
    out_dir : path
        Folder for the converted files (created if missing). It must not be
        the folder of an input with the same format, since LibreOffice keeps
        the file name and changes only the extension.
    to : str
        LibreOffice target format: ``"xlsx"``, ``"pdf"``, ``"ods"``, ...
    timeout : float
        Seconds before the run is stopped.
    soffice : str or path, optional
        The LibreOffice program; looked up on PATH by default.

    Returns
    -------
    list of pathlib.Path
        The converted files, in the order of ``paths``.

    Raises
    ------
    RecalcError
        When LibreOffice is missing, fails, times out, or writes no output.
    """
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    ins = [Path(p).resolve() for p in paths]
    if not ins:
        raise RecalcError("no files to convert.")
    for p in ins:
        if not p.is_file():
            raise RecalcError(f"file to convert not found: {p}")
    ext = to.split(":", 1)[0].strip().lower()
    if not ext or any(c in ext for c in "/\\ "):
        raise RecalcError(f"target format must be a file extension such as 'xlsx' or 'pdf'; got {to!r}.")
    out = Path(out_dir).resolve()
    out.mkdir(parents=True, exist_ok=True)
    names = [p.with_suffix("." + ext).name for p in ins]
    if len(set(names)) != len(names):
        raise RecalcError("two input files would give the same output name; convert them in separate calls.")
    for p, nm in zip(ins, names):
        if p.parent == out and p.name == nm:
            raise RecalcError(f"converting {p.name} into its own folder would overwrite it; choose another out_dir.")
    exe = find_soffice(soffice)
    profile = Path(tempfile.mkdtemp(prefix="unbend-lo-profile-"))
    staging = Path(tempfile.mkdtemp(prefix=".unbend-convert-", dir=out))
    try:
        (profile / "user").mkdir()
        (profile / "user" / "registrymodifications.xcu").write_text(_PROFILE_SETTINGS, encoding="utf-8")
        cmd = [exe, f"-env:UserInstallation={profile.as_uri()}", "--headless", "--norestore", "--nologo",
               "--nodefault", "--nolockcheck", "--calc", "--convert-to", to, "--outdir", str(staging),
               *map(str, ins)]
        proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, start_new_session=True)
        try:
            so, se = proc.communicate(timeout=timeout)
        except subprocess.TimeoutExpired:
            _stop(proc)
            raise RecalcError(f"LibreOffice did not finish within {timeout:g} seconds.") from None
        done = []
        missing = []
        for nm in names:
            f = staging / nm
            if f.is_file() and f.stat().st_size > 0:
                done.append(f)
            else:
                missing.append(nm)
        if proc.returncode != 0 or missing:
            tail = (se.decode("utf-8", "replace") + so.decode("utf-8", "replace")).strip()[-800:]
            raise RecalcError(f"LibreOffice failed (exit code {proc.returncode}); no output for "
                              f"{', '.join(missing) or 'none'}. Its messages: {tail}")
        result = []
        for f in done:
            dest = out / f.name
            os.replace(f, dest)
            result.append(dest)
        return result
    finally:
        shutil.rmtree(staging, ignore_errors=True)
        shutil.rmtree(profile, ignore_errors=True)


def _stop(proc: subprocess.Popen) -> None:
    """Stop the LibreOffice run started here (its own process group) and reap it."""
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError):
        pass
    try:
        proc.communicate(timeout=10)
    except subprocess.TimeoutExpired:
        pass


def recalculate(path_in, path_out_dir, *, timeout: float = DEFAULT_TIMEOUT,
                soffice: str | os.PathLike | None = None) -> Path:
    """Recalculate one workbook in LibreOffice and save it, with computed values, as .xlsx in ``path_out_dir``.

    Parameters
    ----------
    path_in : path
        The workbook (.xlsx, .ods, ...).
    path_out_dir : path
        Folder for the recalculated copy (not the folder of ``path_in`` when
        that is already an .xlsx file).

    Returns
    -------
    pathlib.Path
        The recalculated .xlsx; read its values with
        ``openpyxl.load_workbook(path, data_only=True)``.

    Examples
    --------
    >>> from unbend.udfs.recalc import recalculate          # doctest: +SKIP
    >>> out = recalculate("model.xlsx", "/tmp/recalculated")  # doctest: +SKIP
    """
    return convert([path_in], path_out_dir, "xlsx", timeout=timeout, soffice=soffice)[0]


def recalculate_many(paths, path_out_dir, *, timeout: float = DEFAULT_TIMEOUT,
                     soffice: str | os.PathLike | None = None) -> list[Path]:
    """Like :func:`recalculate` for several workbooks in one LibreOffice run (much faster than one run each)."""
    return convert(paths, path_out_dir, "xlsx", timeout=timeout, soffice=soffice)
