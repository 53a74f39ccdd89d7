"""Print the installed versions of the scientific stack (first lines of every CI log).

Run as ``python tests/versions.py``; a package that is not installed is listed as such.
"""

import importlib.metadata
import platform
import sys

PACKAGES = [
    "numpy", "scipy", "pandas", "matplotlib", "lmfit", "scikit-image", "openpyxl", "tifffile",
    "ruptures", "pillow", "dask", "distributed", "pytest", "hypothesis", "periodictable",
]


def blas() -> str:
    """The BLAS/LAPACK numpy was built against, as numpy reports it."""
    try:
        import numpy as np

        config = np.show_config(mode="dicts")
        lib = config["Build Dependencies"]["blas"]
        return f"{lib.get('name', '?')} {lib.get('version', '?')}"
    except Exception as exc:  # older numpy has no mode="dicts"
        return f"unknown ({type(exc).__name__})"


def main() -> None:
    print(f"python {sys.version.split()[0]} on {platform.platform()} ({platform.machine()})")
    for name in PACKAGES:
        try:
            version = importlib.metadata.version(name)
        except importlib.metadata.PackageNotFoundError:
            version = "not installed"
        print(f"{name} {version}")
    print(f"blas {blas()}")


if __name__ == "__main__":
    main()
