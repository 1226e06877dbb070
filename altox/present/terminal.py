"""The one way altox opens a rich console: user text is printed as written, never read as markup.

Plan names, people's names and notes reach tables and lines; with rich's defaults a name such
as ``[/red]`` or ``[link=...]`` would be read as console markup (an error, or a hyperlink the
user did not write) and ``:smile:`` as an emoji code.  altox's own texts use no markup, so it is
switched off everywhere.  Control characters never get this far: the plan reader refuses them
(:mod:`altox.yamlload`).
"""

from __future__ import annotations


def console(**kwargs):
    """A :class:`rich.console.Console` with markup and emoji codes off (keywords pass through)."""
    from rich.console import Console

    return Console(markup=False, emoji=False, **kwargs)


def caution_panel():
    from rich.panel import Panel

    from altox.guidance.cautions import CAUTION

    return Panel(CAUTION, title="Caution", title_align="left", border_style="bold")
