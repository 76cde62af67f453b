"""Reports: figures (matplotlib, lazy), tables and self-contained HTML.

Nothing here is imported by the computational modules; the report layer reads their results.
"""
