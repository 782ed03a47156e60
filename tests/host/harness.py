"""xlwings' own Windows user-function code, run on Linux with stand-ins for the COM layer only.

:func:`load` imports the installed xlwings package as it imports itself on Windows
(``sys.platform`` reads ``win32`` while ``xlwings/__init__.py`` runs), with pywin32 replaced by
:mod:`stubs`. So ``xw.func``/``xw.arg``/``xw.ret`` are xlwings' ``xlfunc``/``xlarg``/``xlret`` when
``unbend.udfs`` is imported, and ``unbend.udfs`` is imported the way xlwings imports a UDF module
(``xlwings.udfs.get_udf_module``, called by ``call_udf``). A call then takes the path a cell's
formula takes: the VBA wrapper's ``XLPy.CallUDF(module, name, Array(args...), ThisWorkbook,
Application.Caller)`` is ``xlwings.com_server.XLPython.CallUDF``, which runs ``call_udf``: reading
each argument with ``xlwings.conversion.read`` (from a Range, or from a plain value), calling the
function, writing the result with ``xlwings.conversion.write`` and reshaping it for COM.

Only the stand-ins (:mod:`stubs`) and the fake workbook (:mod:`excel`) are ours; every xlwings
module is the installed one, unchanged, imported from site-packages.

The Windows-mode modules live beside the ordinary (Linux-mode) ones: they occupy ``sys.modules``
only while a call runs (:func:`windows_mode`; xlwings imports some of its own modules at call
time), and the previous entries are put back afterwards, so other tests keep the modules they imported.
"""
from __future__ import annotations

import contextlib
import functools
import importlib
import sys
import types

from . import excel, stubs

MODULE = "unbend.udfs"


def _owned(name: str) -> bool:
    return (name == "xlwings" or name.startswith("xlwings.") or name == MODULE or name.startswith(MODULE + ".")
            or name in stubs.NAMES)


@contextlib.contextmanager
def windows_mode(modules: dict):
    """Put the Windows-mode modules (and the stand-ins) in ``sys.modules`` for the duration.

    Cheap enough to wrap every call: only the known names are swapped, and ``sys.modules`` is
    scanned again only when something was imported meanwhile.
    """
    names = list(modules)
    saved = {k: sys.modules.pop(k) for k in names if k in sys.modules}
    parent = _parent_attribute()
    size = len(sys.modules)
    sys.modules.update(modules)
    try:
        yield
    finally:
        if len(sys.modules) != size + len(modules):  # something new was imported: keep it in the set
            for k in [k for k in sys.modules if _owned(k)]:
                modules[k] = sys.modules[k]
        for k in list(modules):
            sys.modules.pop(k, None)
        sys.modules.update(saved)
        parent()


def _parent_attribute():
    """Importing unbend.udfs sets the attribute ``udfs`` on the (shared) engine package ``unbend``;
    returns a function that puts the previous one back, so ``import unbend.udfs as U`` elsewhere keeps
    giving the ordinary module."""
    import unbend
    had, old = hasattr(unbend, "udfs"), getattr(unbend, "udfs", None)

    def restore():
        if had:
            unbend.udfs = old
        elif hasattr(unbend, "udfs"):
            del unbend.udfs
    return restore


@functools.lru_cache(maxsize=1)
def load() -> types.SimpleNamespace:
    """Import xlwings' Windows code and unbend.udfs through it (once per process).

    Returns
    -------
    SimpleNamespace
        ``xw`` (the Windows-mode xlwings package), ``udfs`` (xlwings.udfs), ``com_server``,
        ``conversion``, ``xlwindows`` (xlwings._xlwindows), ``module`` (unbend.udfs as xlwings
        imported it), ``Host`` (a factory for a fake program with a workbook).
    """
    # load everything xlwings imports once, the ordinary way, so that no other module is imported
    # while sys.platform reads win32 below
    import asyncio  # noqa: F401
    import concurrent.futures  # noqa: F401
    import ctypes  # noqa: F401
    import locale  # noqa: F401
    import shlex  # noqa: F401
    import tempfile  # noqa: F401

    import xlwings  # noqa: F401
    import unbend.udfs  # noqa: F401

    saved = {k: v for k, v in sys.modules.items() if _owned(k)}
    for k in saved:
        del sys.modules[k]
    parent = _parent_attribute()
    undo_ctypes = stubs.ctypes_patch()
    platform = sys.platform
    try:
        stubs.install(stubs.build())
        sys.platform = "win32"
        try:
            xw = importlib.import_module("xlwings")
        finally:
            sys.platform = platform
        assert xw.func is xw.udfs.xlfunc and xw.arg is xw.udfs.xlarg and xw.ret is xw.udfs.xlret
        import xlwings._xlwindows as xlwindows
        import xlwings.com_server as com_server
        import xlwings.conversion as conversion
        import xlwings.udfs as xludfs
        app = excel.Application()
        module = xludfs.get_udf_module(MODULE, app.book("import.xlsm"))
        # unbend.udfs loads its functions at the first look-up (PEP 562); xlwings looks them up at once
        # (import_udfs walks dir(module)), in Windows mode, so do that here before the platform is restored
        for name in dir(module):
            getattr(module, name)
        ns = types.SimpleNamespace(xw=xw, udfs=xludfs, com_server=com_server, conversion=conversion,
                                   xlwindows=xlwindows, module=module,
                                   modules={k: v for k, v in sys.modules.items() if _owned(k)})
    finally:
        for k in [k for k in sys.modules if _owned(k)]:
            del sys.modules[k]
        sys.modules.update(saved)
        parent()
        undo_ctypes()
    return ns


class Host:
    """A fake spreadsheet program with one workbook, driving the functions through xlwings.

    Parameters
    ----------
    book_name : str
        The workbook's file name (``.xlsm`` for a macro-enabled workbook, ``.xlam`` for an add-in).
    dynamic_arrays : bool
        Whether the program has dynamic arrays (spilling).
    """

    def __init__(self, book_name="analysis.xlsm", dynamic_arrays=True):
        self.ns = load()
        self.app = excel.Application(dynamic_arrays=dynamic_arrays)
        self.book = self.app.book(book_name)
        self.sheet = self.book.add_sheet("Data")
        self.out = self.book.add_sheet("Results")
        self._server = self.ns.com_server.XLPython()

    def active(self):
        return windows_mode(self.ns.modules)

    def call(self, name, *args, caller=None):
        """What a formula in ``caller`` (default Results!A1) gets back: XLPython.CallUDF's result.

        ``args`` are what VBA packs with ``Array(...)``: fake Ranges for references, plain values for
        literals, :data:`excel.MISSING` for an omitted optional argument. Arguments left off at
        the end are passed as MISSING, as VBA does for Optional parameters.
        """
        fn = getattr(self.ns.module, name)
        n = len(fn.__xlfunc__["args"])
        args = tuple(args) + (excel.MISSING,) * (n - len(args))
        caller = caller if caller is not None else self.out.ref("A1")
        with self.active():
            return self._server.CallUDF(MODULE, name, args, self.book, caller)

    def import_functions(self):
        """Run xlwings' Import Functions on the workbook; returns (VBA module text, MacroOptions)."""
        with self.active():
            self.ns.udfs.import_udfs(MODULE, self.book)
        return self.book.VBProject.VBComponents.modules["xlwings_udfs"], dict(self.app.macro_options)
