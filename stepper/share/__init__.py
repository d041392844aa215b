"""Documents for a teammate: the Markdown and self-contained HTML reports."""
