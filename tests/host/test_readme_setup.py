"""The README's spreadsheet set-up, step by step, against the installed xlwings' own code.

Every name the README asks a user to type, click or run is looked up where xlwings defines it: its
command line (``cli.py``), its standalone VBA module (``xlwings.bas``), its add-in (``addin/*.bas``
and the ribbon in ``addin/xlwings.xlam``), its UDF code (``udfs.py``: what Import Functions writes)
and its standalone template (``quickstart_standalone.xlsm``). If a later xlwings renames one of
them, these checks fail and the README must follow.
"""
from __future__ import annotations

import re
import zipfile
from pathlib import Path

import pytest

from .harness import Host, load

README = Path(__file__).resolve().parents[2] / "README.md"


@pytest.fixture(scope="module")
def setup_text():
    text = README.read_text(encoding="utf-8")
    return text[text.index("## For spreadsheet users"):text.index("Examples (data in a table named")]


@pytest.fixture(scope="module")
def xl():
    return Path(load().xw.__file__).resolve().parent


def _read(path: Path) -> str:
    return path.read_text(encoding="utf-8", errors="replace")


def test_commands_exist_in_xlwings_command_line(setup_text, xl):
    cli = _read(xl / "cli.py")
    assert "`xlwings config create`" in setup_text
    assert 'subparsers.add_parser(\n        "config"' in cli and 'config_subparsers.add_parser("create")' in cli
    # config create records the Python it runs under as INTERPRETER_WIN in the user config file
    body = cli[cli.index("def config_create"):cli.index("def code_embed")]
    assert "INTERPRETER_{}" in body and "sys.executable" in body and "USER_CONFIG_FILE" in body
    assert "`INTERPRETER_WIN`" in setup_text and 'GetConfig("INTERPRETER_WIN"' in _read(xl / "xlwings.bas")
    assert "`xlwings addin install`" in setup_text and 'addin_subparsers.add_parser("install")' in cli
    assert "`xlwings quickstart myproject --standalone`" in setup_text and '"--standalone"' in cli
    assert 'os.path.join(this_dir, "quickstart_standalone.xlsm")' in cli


def test_trust_access_and_macro_enabled_workbooks(setup_text, xl):
    assert "*Trust access to the VBA project object model*" in setup_text
    assert '"Trust access to the VBA project object model"' in _read(xl / "cli.py")
    # Import Functions writes a module into the workbook's VBA project: that is what needs the trust
    assert "xl_workbook.VBProject.VBComponents.Import(tf.name)" in _read(xl / "udfs.py")
    ribbon = _read(xl / "addin" / "RibbonXlwings.bas")
    block = ribbon[ribbon.index("Sub ImportFunctions"):]
    block = block[:block.index("End Sub")]
    assert set(re.findall(r'<> "(\.xl\w+)"', block)) == {".xlsm", ".xlsb", ".xlam"}
    assert "as a macro-enabled workbook first" in block
    assert "as a macro-enabled workbook first" in setup_text
    for ext in (".xlsm", ".xlsb", ".xlam"):
        assert f"`{ext}`" in setup_text


def test_the_vba_the_functions_need_is_standalone_or_the_referenced_addin(setup_text, xl):
    # what Import Functions writes calls XLPy, defined in the standalone module and in the add-in
    vba, _ = Host().import_functions()
    assert "XLPy.CallUDF(" in vba
    assert "Function XLPy()" in _read(xl / "xlwings.bas")
    assert "Function XLPy()" in _read(xl / "addin" / "Main.bas")
    assert "Tools > References..., tick `xlwings`" in setup_text
    # the standalone template carries the module, and its config sheet is named with a leading underscore
    with zipfile.ZipFile(xl / "quickstart_standalone.xlsm") as z:
        sheets = re.findall(r'<sheet name="([^"]+)"', z.read("xl/workbook.xml").decode())
        assert b"Module=xlwings" in z.read("xl/vbaProject.bin")
    assert "_xlwings.conf" in sheets and "rename its `_xlwings.conf` sheet to `xlwings.conf`" in setup_text
    assert (xl / "xlwings.bas").is_file() and "import `xlwings.bas`" in setup_text
    # the module is tied to its xlwings version through the DLL it loads
    assert re.search(r'XLPyDLLName As String = "xlwings64-\d+\.\d+\.\d+\.dll"', _read(xl / "xlwings.bas"))


def test_udf_modules_setting_and_the_import_macro(setup_text, xl):
    bas = _read(xl / "xlwings.bas")
    assert 'GetConfig("UDF MODULES")' in bas and "d.Add UCase(cell.Value)" in bas  # keys compared upper-case
    assert 'Set sht = wb.Sheets(PROJECT_NAME & ".conf")' in bas and 'PROJECT_NAME As String = "xlwings"' in bas
    assert "named `xlwings.conf` with `UDF Modules` in A1" in setup_text
    assert "Sub ImportPythonUDFs()" in bas and "`ImportPythonUDFs`" in setup_text
    with zipfile.ZipFile(xl / "addin" / "xlwings.xlam") as z:
        ui = z.read("customUI/customUI.xml").decode()
    for label in ("Import Functions", "UDF Modules:", "Interpreter:"):
        assert f'label="{label}"' in ui
    assert "*Import Functions*" in setup_text and "*UDF Modules*" in setup_text and "*Interpreter*" in setup_text


def test_the_function_wizard_guard_is_xlwings_own(setup_text, xl):
    src = _read(xl / "udfs.py")
    assert 'call_in_wizard = xlfunc["call_in_wizard"]' in src
    assert 'Application.CommandBars("Standard")' in src
    assert "do not run while the function wizard is open" in setup_text
