"""Interactive widgets (ipywidgets + bqplot) over the computation core.

Importing this subpackage imports ipywidgets and bqplot, which come with the
``widgets`` extra (``pip install "pkwidgets[widgets]"``); the core
(``import pkwidgets``) imports neither.
"""

try:
    import bqplot  # noqa: F401 - checked here so a missing extra gives one clear message
    import ipywidgets  # noqa: F401
except ImportError as exc:
    raise ImportError(
        f"pkwidgets.widgets needs ipywidgets and bqplot ({exc.name or exc} is missing): "
        f'pip install "pkwidgets[widgets]" (the analysis notebooks\' extra, "pkwidgets[notebooks]", includes it).'
    ) from exc

from .navigator import StudyNavigator  # noqa: E402
from .picker import TerminalPhasePicker  # noqa: E402
from .toggles import MethodToggles  # noqa: E402

__all__ = ["MethodToggles", "StudyNavigator", "TerminalPhasePicker"]
