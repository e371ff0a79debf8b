"""warnings.warn pointing at the user's line: the first frame outside the wkbfit package."""
import os
import sys
import warnings

_PACKAGE_DIR = os.path.dirname(os.path.abspath(__file__))


def warn(message, category=UserWarning):
    """Issue a warning attributed to the first caller outside wkbfit (however deep inside it we are)."""
    level = 2
    frame = sys._getframe(1)
    while frame is not None and os.path.dirname(os.path.abspath(frame.f_code.co_filename)) == _PACKAGE_DIR:
        frame = frame.f_back
        level += 1
    warnings.warn(message, category, stacklevel=level)
