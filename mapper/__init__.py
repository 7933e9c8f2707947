"""mapper: electrostatic field surveys from grid plan to GIS layers and report.

The package follows the survey's data flow, one sub-package per stage::

    site -> plan -> readings (survey file) -> corrections -> field -> features -> export

``cli`` and ``app`` are thin shells over the same library calls.
"""

__version__ = "0.1.0"
