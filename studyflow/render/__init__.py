"""Rendering: sandboxed Jinja templates into write-if-changed case folders."""

from .cases import (
    STATE,
    RenderedCase,
    Renderer,
    RenderResult,
    command_tokens,
    context_for,
    make_renderer,
    removed_cases,
    render_all,
    render_study,
)
from .templates import load_templates, make_environment

__all__ = [
    "STATE", "RenderedCase", "Renderer", "RenderResult", "command_tokens", "context_for", "make_renderer",
    "removed_cases", "render_all", "render_study", "load_templates", "make_environment",
]
