"""System libraries the Qt X11 (xcb) platform plugin needs, checked before Qt loads.

The Qt wheels bring Qt itself but not the X11 client libraries of the desktop. When one
is missing, Qt aborts the process with a core dump ("Could not load the Qt platform
plugin xcb") and does not say which library to install. This module asks the dynamic
linker's cache (``ldconfig -p``) for each library the plugin links against and names
the Debian/Ubuntu packages of those missing, so the user gets one line instead.

No Qt import here: the check must run before Qt does.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys

#: Shared objects the xcb platform plugin and Qt GUI link against (read from the
#: NEEDED entries of ``libqxcb.so``, ``libQt6XcbQpa.so.6`` and ``libQt6Gui.so.6`` of
#: the PySide6 6.11 wheels with ``objdump -p``), with the Debian/Ubuntu package of each.
XCB_PLUGIN_LIBRARIES = {
    "libxcb-cursor.so.0": "libxcb-cursor0",
    "libxcb-icccm.so.4": "libxcb-icccm4",
    "libxcb-util.so.1": "libxcb-util1",
    "libxcb-image.so.0": "libxcb-image0",
    "libxcb-keysyms.so.1": "libxcb-keysyms1",
    "libxcb-randr.so.0": "libxcb-randr0",
    "libxcb-render.so.0": "libxcb-render0",
    "libxcb-render-util.so.0": "libxcb-render-util0",
    "libxcb-shape.so.0": "libxcb-shape0",
    "libxcb-shm.so.0": "libxcb-shm0",
    "libxcb-sync.so.1": "libxcb-sync1",
    "libxcb-xfixes.so.0": "libxcb-xfixes0",
    "libxcb-xkb.so.1": "libxcb-xkb1",
    "libxcb.so.1": "libxcb1",
    "libX11-xcb.so.1": "libx11-xcb1",
    "libX11.so.6": "libx11-6",
    "libxkbcommon.so.0": "libxkbcommon0",
    "libxkbcommon-x11.so.0": "libxkbcommon-x11-0",
    "libGL.so.1": "libgl1",
    "libEGL.so.1": "libegl1",
    "libfontconfig.so.1": "libfontconfig1",
    "libglib-2.0.so.0": "libglib2.0-0",
    "libdbus-1.so.3": "libdbus-1-3",
}

#: Platforms that draw without X11: nothing to check.
NON_X11_PLATFORMS = {"offscreen", "minimal", "vnc", "linuxfb", "eglfs", "wayland",
                     "wayland-egl", "vkkhrdisplay", "minimalegl"}


def uses_xcb(environ=os.environ, platform: str = sys.platform) -> bool:
    """Whether Qt will load its xcb plugin: Linux, an X display, no other platform chosen."""
    if not platform.startswith("linux"):
        return False
    qpa = environ.get("QT_QPA_PLATFORM", "").split(":")[0].split(";")[0].strip()
    if qpa:
        return qpa == "xcb"
    if environ.get("WAYLAND_DISPLAY") and environ.get("XDG_SESSION_TYPE") == "wayland":
        return False  # Qt 6 prefers its wayland plugin there
    return bool(environ.get("DISPLAY"))


def linker_cache() -> set[str] | None:
    """Sonames the dynamic linker knows (``ldconfig -p``); None when it cannot be asked."""
    ldconfig = shutil.which("ldconfig") or next(
        (p for p in ("/sbin/ldconfig", "/usr/sbin/ldconfig") if os.path.exists(p)), None)
    if ldconfig is None:
        return None
    try:
        listing = subprocess.run([ldconfig, "-p"], capture_output=True, text=True, timeout=10,
                                 check=True).stdout
    except (OSError, subprocess.SubprocessError):
        return None
    return {line.split()[0] for line in listing.splitlines()[1:] if line.strip()}


def missing_packages(known: set[str] | None, environ=os.environ) -> list[str]:
    """Debian/Ubuntu packages of the plugin's libraries absent from ``known`` (in order).

    ``LD_LIBRARY_PATH`` folders count too, since the loader searches them first.
    """
    if known is None:
        return []
    extra = set()
    for folder in environ.get("LD_LIBRARY_PATH", "").split(os.pathsep):
        if folder and os.path.isdir(folder):
            extra.update(os.listdir(folder))
    return [package for soname, package in XCB_PLUGIN_LIBRARIES.items()
            if soname not in known and soname not in extra]


def missing_library_message(packages: list[str]) -> str:
    """The one line printed when the desktop lacks libraries Qt needs."""
    return ("the Qt X11 platform plugin needs system libraries that are missing; install them "
            f"with: sudo apt install {' '.join(packages)}  (see README, Troubleshooting)")


def check_before_qt(environ=os.environ, platform: str = sys.platform,
                    cache=None) -> str | None:
    """The one-line problem when the GUI would crash for want of X11 libraries, else None.

    ``cache``: a callable giving the known sonames (default :func:`linker_cache`).
    """
    if not uses_xcb(environ, platform):
        return None
    packages = missing_packages((cache or linker_cache)(), environ)
    return missing_library_message(packages) if packages else None
