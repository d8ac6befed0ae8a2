"""Interactive widgets (ipywidgets + bqplot) over the computation core.

Importing this subpackage imports ipywidgets and bqplot; the core
(``import pkwidgets``) does not.
"""

from .navigator import StudyNavigator
from .picker import TerminalPhasePicker
from .toggles import MethodToggles

__all__ = ["MethodToggles", "StudyNavigator", "TerminalPhasePicker"]
