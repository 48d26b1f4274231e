"""Views of results: terminal text, Markdown, HTML, figures and error maps.

They draw a result object and import nothing of the study stage, so the
result records can show themselves (``print(result)``, notebooks).
"""
