"""A report's files (the workbook and its plots folder) put in place as one unit.

Rules
-----
* An existing workbook or plots folder is replaced only when the caller says
  so (``overwrite=True``, the command's ``--overwrite``); a read-only one
  never is.
* A folder that cannot be written is named in the message.
* Two runs that write the same target at the same time never leave the
  workbook of one run with the plots of the other.

How
---
1. :meth:`ReportFiles.open` checks the targets and makes a private staging
   folder (``tempfile.mkdtemp``, mode 0700) *beside* the target, so every
   later move is a rename within one file system: no copying, no half files.
   Making it is also the real test that the folder can be written.
2. The caller writes the workbook and the plots into the staging folder.
3. :meth:`ReportFiles.publish` takes an exclusive lock on a lock file beside
   the target (``.NAME.unbend-lock``), checks the targets again (another run
   may have written them meanwhile), moves the plots into place and then the
   workbook (the workbook last: once it is there, its plots are too), and
   releases the lock. Every unbend run takes the same lock before it moves
   anything, so moves of two runs cannot interleave; the last run to take the
   lock leaves both of its files, or (without overwrite) the later run
   refuses and leaves the earlier run's files whole.

Locks and renames, by system
----------------------------
* POSIX (Linux, macOS): ``fcntl.flock`` on the lock file. The kernel drops the
  lock when the process ends, however it ends, so a crash never leaves a lock
  that blocks the next run. The holder deletes the lock file before it lets
  go; a waiter that then gets the lock checks that its open file is still the
  one at the path (same inode) and otherwise opens the new one, the usual way
  to delete lock files without a race. A workbook that must not replace
  anything is put in place with ``os.link`` (fails if the name exists,
  atomically) and the staged name unlinked; where hard links are not
  supported the check and ``os.rename`` run under the lock. Replacing uses
  ``os.replace`` (atomic ``rename(2)``).
* Windows: ``msvcrt.locking`` on the first byte of the lock file, released by
  the system when the process ends. ``os.rename`` refuses an existing target
  (so it is the no-replace move) and ``os.replace`` replaces
  (``MoveFileEx`` with ``MOVEFILE_REPLACE_EXISTING``); a workbook open in a
  spreadsheet program cannot be replaced and the message says to close it.
  A lock file still open by a waiting run cannot be deleted; it is left for
  that run to delete.

If a move fails (a full disk, a file held open), the moves already made are
undone and the message says nothing was changed. Not covered: a process
killed *between* two moves leaves them half done (the earlier files then sit
in its staging folder, a hidden ``.unbend-...`` folder beside the target).
"""
from __future__ import annotations

import errno
import os
import shutil
import stat
import tempfile
import time

__all__ = ["OutputError", "ReportFiles", "target_lock", "plots_folder_for", "atomic_save", "same_file"]

#: How long a run waits for another run to finish putting its files in place.
LOCK_WAIT_SECONDS = 120.0


class OutputError(OSError):
    """The report cannot be written where asked; the message says why and what to do."""

    def __str__(self):
        return self.args[0] if self.args else "cannot write the report"


def plots_folder_for(workbook_path: str) -> str:
    """Where the plots of a report workbook go: ``REPORT_plots`` beside ``REPORT.xlsx``."""
    return os.path.splitext(workbook_path)[0] + "_plots"


def _read_only(path: str) -> bool:
    st = os.stat(path)
    # mode bits, not os.access: for an administrator os.access says yes to everything
    return not (st.st_mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH)) or not os.access(path, os.W_OK)


def _why(e: OSError) -> str:
    return (e.strerror or str(e)).lower()


class ReportFiles:
    """The workbook and plots of one report run, staged and then published as one unit.

    Parameters
    ----------
    workbook : str
        Target workbook path (.xlsx).
    plot_names : sequence of str
        File names the plots folder will hold.
    overwrite : bool
        Replace an existing workbook and plots (never read-only ones).
    """

    def __init__(self, workbook, plot_names, *, overwrite: bool = False):
        self.workbook = os.path.abspath(os.fspath(workbook))
        self.plots = plots_folder_for(self.workbook)
        self.plot_names = list(plot_names)
        self.overwrite = overwrite
        self.folder = os.path.dirname(self.workbook)
        self.stage = None

    # ------------------------------------------------------------------ checks
    def check_targets(self) -> None:
        """Refuse, in words, a target that exists (without overwrite) or is read-only."""
        name = os.path.basename(self.workbook)
        for path, what in ((self.workbook, "workbook"), (self.plots, "plots folder")):
            if not os.path.lexists(path):
                continue
            if what == "workbook" and os.path.isdir(path):
                raise OutputError(f"{path} is a folder; give --out a workbook file name ending in .xlsx.")
            if what == "plots folder" and not os.path.isdir(path):
                raise OutputError(f"{path} exists and is not a folder; the plots of {name} go there. Move it, or "
                                  "choose another --out.")
            if not self.overwrite:
                extra = " (the plots of " + name + " go there)" if what == "plots folder" else ""
                raise OutputError(f"{path} already exists{extra}; unbend does not replace files unless told to. "
                                  "Add --overwrite to replace it, or choose another --out.")
            if what == "workbook" and _read_only(path):
                raise OutputError(f"{path} is read-only; unbend never replaces a read-only file, even with "
                                  "--overwrite. Choose another --out, or make the file writable first.")
            if what == "plots folder":
                for p in self.plot_names:
                    q = os.path.join(path, p)
                    if os.path.lexists(q) and (os.path.isdir(q) or _read_only(q)):
                        raise OutputError(f"{q} is read-only or a folder; unbend never replaces a read-only file, "
                                          "even with --overwrite. Choose another --out.")

    # ------------------------------------------------------------------ staging
    def open(self) -> "ReportFiles":
        """Check the targets and make the private staging folder beside the target."""
        self.check_targets()
        try:
            os.makedirs(self.folder, exist_ok=True)
        except OSError as e:
            raise OutputError(f"cannot make the folder {self.folder} ({_why(e)}); choose another --out.") from None
        if not os.path.isdir(self.folder):
            raise OutputError(f"{self.folder} is not a folder; choose another --out.")
        try:
            self.stage = tempfile.mkdtemp(prefix=".unbend-", dir=self.folder)
            os.mkdir(os.path.join(self.stage, "plots"))
        except OSError as e:
            self.discard()
            raise OutputError(f"cannot write in the folder {self.folder} ({_why(e)}); choose another --out, in a "
                              "folder you can write to.") from None
        return self

    @property
    def staged_workbook(self) -> str:
        return os.path.join(self.stage, "report.xlsx")

    @property
    def staged_plots(self) -> str:
        return os.path.join(self.stage, "plots")

    def discard(self) -> None:
        """Remove the staging folder and whatever is in it."""
        if self.stage and os.path.isdir(self.stage):
            shutil.rmtree(self.stage, ignore_errors=True)
        self.stage = None

    def __enter__(self):
        return self.open()

    def __exit__(self, *exc):
        self.discard()
        return False

    # ------------------------------------------------------------------ publishing
    def publish(self) -> tuple[str, list]:
        """Move the staged plots and then the workbook into place, under the target's lock.

        With overwrite, the earlier workbook and plots are first set aside into
        the staging folder (the workbook first: a workbook open in a
        spreadsheet program on Windows cannot be moved, and then nothing has
        changed yet). If any move fails, the moves already made are undone in
        reverse order, so the target is left as it was.

        Returns
        -------
        (workbook path, list of plot paths)
        """
        staged = sorted(os.listdir(self.staged_plots))
        if staged != sorted(self.plot_names) or not os.path.isfile(self.staged_workbook):
            raise OutputError("internal: the staged report is incomplete; nothing was put in place.")
        with target_lock(self.workbook):
            self.check_targets()
            done = []  # (from, to) of every move made, to undo them if a later one fails

            def move(src, dst, replace_ok=True):
                if replace_ok:
                    os.replace(src, dst)
                else:
                    _move_no_replace(src, dst)
                done.append((src, dst))

            try:
                if self.overwrite:
                    old = os.path.join(self.stage, "earlier")
                    os.mkdir(old)
                    if os.path.lexists(self.workbook):
                        move(self.workbook, os.path.join(old, "report.xlsx"))
                    for p in self.plot_names:
                        if os.path.lexists(os.path.join(self.plots, p)):
                            move(os.path.join(self.plots, p), os.path.join(old, p))
                if not os.path.lexists(self.plots):
                    move(self.staged_plots, self.plots)  # the whole folder in one step
                else:
                    for p in self.plot_names:
                        move(os.path.join(self.staged_plots, p), os.path.join(self.plots, p))
                move(self.staged_workbook, self.workbook, replace_ok=False)  # last: its plots are in place
            except OSError as e:
                for src, dst in reversed(done):
                    try:
                        os.replace(dst, src)
                    except OSError:
                        pass
                if isinstance(e, FileExistsError):
                    raise OutputError(f"{self.workbook} appeared while this report was being written; it was "
                                      "kept. Add --overwrite to replace it, or choose another --out.") from None
                raise OutputError(f"cannot put the report in place at {e.filename or self.workbook} ({_why(e)}); "
                                  "nothing was changed. If the file is open in a spreadsheet program, close it "
                                  "and run again, or choose another --out.") from None
        return self.workbook, [os.path.join(self.plots, p) for p in self.plot_names]


def _move_no_replace(src: str, dst: str) -> None:
    """Rename ``src`` to ``dst``; FileExistsError if ``dst`` exists (atomic where the system allows)."""
    if os.name == "nt":
        os.rename(src, dst)  # Windows: rename never replaces
        return
    try:
        os.link(src, dst)  # fails with EEXIST if dst exists, atomically
    except FileExistsError:
        raise
    except OSError as e:
        if e.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV, errno.EMLINK, errno.ENOSYS):
            raise
        # no hard links here (some network and FAT file systems): check, then rename, under the lock
        if os.path.lexists(dst):
            raise FileExistsError(errno.EEXIST, "File exists", dst) from None
        os.rename(src, dst)
        return
    os.unlink(src)


class target_lock:
    """Exclusive lock on ``.NAME.unbend-lock`` beside ``path``, held by one unbend run at a time.

    Waits up to :data:`LOCK_WAIT_SECONDS` for another run; the system releases
    the lock when a process ends, so an abandoned lock file blocks nobody.
    """

    def __init__(self, path, wait: float | None = None):
        path = os.path.abspath(os.fspath(path))
        self.path = os.path.join(os.path.dirname(path), "." + os.path.basename(path) + ".unbend-lock")
        self.wait = LOCK_WAIT_SECONDS if wait is None else wait
        self.fd = None

    def __enter__(self):
        deadline = time.monotonic() + self.wait
        while True:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
            if _try_lock(fd, self.path):
                try:
                    same = os.path.samestat(os.fstat(fd), os.stat(self.path))
                except FileNotFoundError:
                    same = False
                if same:
                    self.fd = fd
                    return self
                _unlock(fd)  # the previous holder deleted this file: lock the new one
            os.close(fd)
            if time.monotonic() > deadline:
                raise OutputError(f"another unbend run has been writing {self.path[:-len('.unbend-lock')]} for "
                                  f"{self.wait:.0f} s; wait for it to finish, or choose another --out.")
            time.sleep(0.05)

    def __exit__(self, *exc):
        fd, self.fd = self.fd, None
        if os.name != "nt":
            try:
                os.unlink(self.path)  # while still holding the lock; waiters notice the new inode
            except OSError:
                pass
            _unlock(fd)
            os.close(fd)
        else:
            _unlock(fd)
            os.close(fd)
            try:
                os.unlink(self.path)
            except OSError:  # another run has it open: that run deletes it
                pass
        return False


def _try_lock(fd, path) -> bool:
    if os.name == "nt":  # pragma: no cover - Windows
        import msvcrt
        try:
            os.lseek(fd, 0, os.SEEK_SET)
            msvcrt.locking(fd, msvcrt.LK_NBLCK, 1)
            return True
        except OSError:
            return False
    import fcntl
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except BlockingIOError:
        return False
    except OSError as e:  # a file system without locks: say so rather than write unprotected
        raise OutputError(f"cannot lock {path} ({_why(e)}); the folder's file system does not support locks. "
                          "Choose another --out, on a local disk.") from None


def _unlock(fd) -> None:
    if os.name == "nt":  # pragma: no cover - Windows
        import msvcrt
        try:
            os.lseek(fd, 0, os.SEEK_SET)
            msvcrt.locking(fd, msvcrt.LK_UNLCK, 1)
        except OSError:
            pass
        return
    import fcntl
    fcntl.flock(fd, fcntl.LOCK_UN)


def atomic_save(save, path) -> str:
    """Call ``save(tmp_path)`` then move the file into place in one step.

    The temporary file sits in the target folder so the final rename never
    crosses file systems; on failure it is removed and ``path`` is untouched.
    """
    path = os.fspath(path)
    folder = os.path.dirname(os.path.abspath(path))
    os.makedirs(folder, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".unbend-", suffix=os.path.splitext(path)[1], dir=folder)
    os.close(fd)
    try:
        save(tmp)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except OSError as e:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise OSError(e.errno, e.strerror or str(e), path) from None
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def same_file(a, b) -> bool:
    """True when two paths name the same file (or would, once created)."""
    try:
        if os.path.exists(a) and os.path.exists(b):
            return os.path.samefile(a, b)
    except OSError:
        pass
    return os.path.realpath(os.fspath(a)) == os.path.realpath(os.fspath(b))
