"""Renderers of a StudyReport's dict: terminal summary, Markdown pages, SVG plots, register.

Nothing here computes a number; every value comes from ``StudyReport.to_dict()``.
"""
