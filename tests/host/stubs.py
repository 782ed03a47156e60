"""Small stand-ins for pywin32 (the COM layer), so xlwings' Windows code imports on Linux.

Only what xlwings' Windows modules touch when they are imported and when a user function is called
through them (``xlwings/_xlwindows.py``, ``xlwings/udfs.py``, ``xlwings/com_server.py``):

* ``pywintypes``: ``com_error``, ``error``, ``IID``, ``TimeType`` (the datetime subclass pywin32 hands
  over for a date cell; pywin32 gives it a UTC time zone).
* ``pythoncom``: ``CoInitialize`` and the constants and type table ``com_server`` reads at import.
* ``win32com.client``: ``Dispatch`` returns the object it is given (the fake objects of
  :mod:`excel` already behave like dispatched COM objects), and the base classes xlwings checks with
  ``isinstance``.
* ``win32com.server.util``: ``wrap``/``unwrap`` (``FromVariant`` unwraps; a plain value is not wrapped).
* ``win32api``, ``win32con``, ``win32gui``, ``win32process``, ``win32event``, ``win32timezone``.
* The Windows system libraries xlwings reaches through ``ctypes`` at import (``ole32`` via
  ``oledll``, ``user32`` via ``windll``, and pythoncom's own DLL via ``PyDLL``): pywin32's COM
  plumbing, replaced only while ``xlwings._xlwindows`` is imported.

Nothing here converts a cell value: values reach xlwings exactly as the fake workbook builds them,
in the shapes pywin32 produces (tuples of rows, None, float, str, bool, TimeType, Decimal, int error
codes).
"""
from __future__ import annotations

import datetime as _dt
import sys
import types

#: Module names these stand-ins occupy in ``sys.modules``.
NAMES = ("pywintypes", "pythoncom", "win32api", "win32con", "win32gui", "win32process", "win32event",
         "win32timezone", "win32com", "win32com.client", "win32com.server", "win32com.server.util",
         "win32com.server.policy", "win32com.server.dispatcher")


class com_error(Exception):  # noqa: N801 - pywin32's name
    """pywintypes.com_error: args are (hresult, text, excepinfo, argerror)."""

    def __init__(self, *args):
        super().__init__(*args)
        self.hresult = args[0] if args else None


class TimeType(_dt.datetime):
    """pywintypes.TimeType: the datetime subclass pywin32 returns for a date cell (time zone UTC)."""


def IID(text):  # noqa: N802 - pywin32's name
    return str(text).upper()


class _Anything:
    """A stand-in system library: any attribute is another stand-in; calling one returns 0."""

    def __getattr__(self, name):
        if name.startswith("__"):
            raise AttributeError(name)
        return _Anything()

    def __call__(self, *a, **k):
        return 0


class _PyDLL:
    """Stand-in for ctypes.PyDLL(pythoncom.__file__): xlwings looks up one exported function."""

    def __init__(self, *a, **k):
        pass

    def __getattr__(self, name):
        if name.startswith("__"):
            raise AttributeError(name)
        return lambda *a, **k: None


def _module(name, **attrs):
    m = types.ModuleType(name)
    m.__file__ = f"<stand-in for {name}>"
    m.__dict__.update(attrs)
    return m


def build() -> dict:
    """The stand-in modules, by name."""
    class CDispatch:  # only used in isinstance checks
        pass

    class DispatchBaseClass:
        pass

    class CoClassBaseClass:
        pass

    def Dispatch(obj, userName=None, resultCLSID=None, *a, **k):  # noqa: N802
        return obj

    def DispatchEx(*a, **k):  # noqa: N802
        raise com_error(-2147221005, "no spreadsheet program on this machine", None, None)

    class _Wrapped:
        def __init__(self, obj):
            self.obj = obj

    def wrap(obj, *a, **k):
        return _Wrapped(obj)

    def unwrap(obj):
        if isinstance(obj, _Wrapped):
            return obj
        raise ValueError("not a wrapped Python object")

    class PyIDispatch:  # pythoncom.TypeIIDs[IID_IDispatch]
        pass

    iid_dispatch = IID("{00020400-0000-0000-C000-000000000046}")
    utc = _dt.timezone.utc
    mods = {
        "pywintypes": _module("pywintypes", com_error=com_error, error=com_error, IID=IID, TimeType=TimeType,
                              datetime=TimeType),
        "pythoncom": _module("pythoncom", CoInitialize=lambda *a: None, CoUninitialize=lambda *a: None,
                             com_error=com_error, ole_error=com_error, IID_IDispatch=iid_dispatch,
                             IID_IEnumVARIANT=IID("{00020404-0000-0000-C000-000000000046}"),
                             TypeIIDs={iid_dispatch: PyIDispatch}, CLSCTX_LOCAL_SERVER=4,
                             REGCLS_MULTIPLEUSE=1, REGCLS_SUSPENDED=4, PumpWaitingMessages=lambda: 1),
        "win32api": _module("win32api", GetCurrentThreadId=lambda: 1),
        "win32con": _module("win32con"),
        "win32gui": _module("win32gui", FindWindowEx=lambda *a: 0),
        "win32process": _module("win32process", GetWindowThreadProcessId=lambda hwnd: (1, 4242)),
        "win32event": _module("win32event", INFINITE=-1, QS_ALLEVENTS=0x04BF, WAIT_OBJECT_0=0),
        "win32timezone": _module("win32timezone", TimeZoneInfo=types.SimpleNamespace(utc=lambda: utc)),
        "win32com": _module("win32com"),
        "win32com.client": _module("win32com.client", Dispatch=Dispatch, DispatchEx=DispatchEx, CDispatch=CDispatch,
                                   DispatchBaseClass=DispatchBaseClass, CoClassBaseClass=CoClassBaseClass),
        "win32com.server": _module("win32com.server"),
        "win32com.server.util": _module("win32com.server.util", wrap=wrap, unwrap=unwrap),
        "win32com.server.policy": _module("win32com.server.policy", DefaultPolicy=object),
        "win32com.server.dispatcher": _module("win32com.server.dispatcher"),
    }
    mods["win32com"].client = mods["win32com.client"]
    mods["win32com"].server = mods["win32com.server"]
    mods["win32com.server"].util = mods["win32com.server.util"]
    mods["win32com.server"].policy = mods["win32com.server.policy"]
    mods["win32com.server"].dispatcher = mods["win32com.server.dispatcher"]
    return mods


def install(mods: dict) -> None:
    sys.modules.update(mods)


def ctypes_patch():
    """Apply the ctypes stand-ins; returns a function that undoes them."""
    import ctypes
    saved = {k: getattr(ctypes, k) for k in ("windll", "oledll", "PyDLL") if hasattr(ctypes, k)}
    ctypes.windll = _Anything()
    ctypes.oledll = _Anything()
    ctypes.PyDLL = _PyDLL

    def undo():
        for k in ("windll", "oledll", "PyDLL"):
            if k in saved:
                setattr(ctypes, k, saved[k])
            elif hasattr(ctypes, k):
                delattr(ctypes, k)
    return undo
