"""Kept so that older imports keep working: session files now live in
:mod:`floorwidget.session.files` (and replay scripts in :mod:`floorwidget.session.script`)."""

from __future__ import annotations

from .session.files import design_fingerprint, load_state, save_state

__all__ = ["design_fingerprint", "load_state", "save_state"]
