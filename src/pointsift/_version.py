"""The one version source of pointsift.

``pyproject.toml`` reads the package version from here (``[tool.setuptools.dynamic]``),
so an installed package, an editable install and a source tree all report the
same version; nothing reads installed metadata, so there is no "unknown".
"""

__all__ = ["__version__"]

__version__ = "0.1.0"
