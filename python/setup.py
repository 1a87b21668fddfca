"""Build step of the `ogive` Python package.

Everything declarative is in pyproject.toml. This file adds two things setuptools cannot say
there:

* ``build_py`` first runs ``cargo build --release --manifest-path ext/Cargo.toml`` at the
  repository root (the directory above this one, or ``OGIVE_SOURCE_DIR``) and copies the
  loadable extension it builds (``libogive.so``; ``libogive.dylib`` on macOS, ``ogive.dll``
  on Windows) into the package directory, where pyproject's package-data picks it up. The
  file name is kept: SQLite derives the entry point ``sqlite3_ogive_init`` from it.
* ``bdist_wheel`` marks the wheel as platform-specific (``py3-none-<platform>``): it holds
  a native library, but no Python extension module, so it is not tied to one Python ABI.

Set ``CARGO`` to use a cargo that is not on PATH.
"""

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

from setuptools import Distribution, setup
from setuptools.command.bdist_wheel import bdist_wheel
from setuptools.command.build_py import build_py

HERE = Path(__file__).resolve().parent
PACKAGE_DIR = HERE / "ogive"

if sys.platform == "win32":
    LIBRARY = "ogive.dll"
elif sys.platform == "darwin":
    LIBRARY = "libogive.dylib"
else:
    LIBRARY = "libogive.so"


def source_root():
    """The repository root: the directory holding ext/Cargo.toml."""
    root = Path(os.environ.get("OGIVE_SOURCE_DIR", HERE.parent)).resolve()
    if not (root / "ext" / "Cargo.toml").is_file():
        raise SystemExit(
            f"ogive: cannot build the extension: {root / 'ext' / 'Cargo.toml'} not found. "
            "Build the package from a checkout of the repository (`pip install ./python` "
            "or `pip wheel ./python` at its root; `python -m build --wheel python`, not an "
            "sdist), or set OGIVE_SOURCE_DIR to the repository root."
        )
    return root


def build_extension():
    """Runs cargo and returns the path of the library it built."""
    root = source_root()
    cargo = os.environ.get("CARGO", "cargo")
    command = [
        cargo,
        "build",
        "--release",
        "--manifest-path",
        str(root / "ext" / "Cargo.toml"),
        "--message-format=json-render-diagnostics",
    ]
    print("ogive: " + " ".join(command), file=sys.stderr, flush=True)
    try:
        run = subprocess.run(command, cwd=root, stdout=subprocess.PIPE, check=False)
    except FileNotFoundError:
        raise SystemExit(
            f"ogive: cannot build the extension: `{cargo}` not found. Install Rust "
            "(https://rustup.rs) or set CARGO to the cargo executable."
        ) from None
    if run.returncode != 0:
        raise SystemExit(
            f"ogive: `{' '.join(command)}` failed with exit status {run.returncode} "
            "(its messages are above)."
        )
    # cargo names each artifact it built or found fresh; take the cdylib's file, wherever
    # CARGO_TARGET_DIR put it.
    for line in run.stdout.decode("utf-8", "replace").splitlines():
        try:
            message = json.loads(line)
        except ValueError:
            continue
        if message.get("reason") != "compiler-artifact":
            continue
        if "cdylib" not in message.get("target", {}).get("kind", []):
            continue
        for filename in message.get("filenames", []):
            if Path(filename).name == LIBRARY:
                return Path(filename)
    raise SystemExit(f"ogive: cargo succeeded but reported no {LIBRARY} among its artifacts.")


class BuildPyWithExtension(build_py):
    """build_py that first builds libogive with cargo and copies it into the package."""

    def run(self):
        library = build_extension()
        shutil.copyfile(library, PACKAGE_DIR / LIBRARY)
        print(f"ogive: copied {library} to {PACKAGE_DIR / LIBRARY}", file=sys.stderr)
        super().run()


class PlatformWheel(bdist_wheel):
    """bdist_wheel whose wheel is tagged py3-none-<platform>: native code, any Python 3."""

    def finalize_options(self):
        super().finalize_options()
        self.root_is_pure = False

    def get_tag(self):
        _, _, platform = super().get_tag()
        return "py3", "none", platform


class NativeDistribution(Distribution):
    """Says the distribution holds native code, so that it installs into platlib."""

    def has_ext_modules(self):
        return True


setup(
    distclass=NativeDistribution,
    cmdclass={"build_py": BuildPyWithExtension, "bdist_wheel": PlatformWheel},
)
